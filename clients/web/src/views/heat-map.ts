/**
 * The delay × Doppler heat map of a Gabor stream's recovered coefficients, drawn on a canvas:
 * one cell per grid column, delay across, Doppler up, the frame's strongest cell framed.
 * The strongest cell is also published as data attributes on the canvas
 * (data-peak-delay, data-peak-doppler, data-peak-seq) so tests and tools can read it.
 */
import { brightestCell, cellCount, dopplerCount, type DelayDopplerGrid } from '../delay-doppler.js';
import { fillMagnitudes } from '../magnitudes.js';
import { buildHeatTable, heatIndex } from '../palette.js';

const AXIS_LEFT = 44;
const AXIS_BOTTOM = 30;
const PAD = 8;
const LEGEND = 46;

export interface HeatFrame {
  seq: number;
  indices: Uint32Array;
  values: Float64Array;
}

export class HeatMapView {
  private readonly table = buildHeatTable();
  private grid: DelayDopplerGrid | null = null;
  private magnitudes = new Float64Array(0);
  private cells: ImageData | null = null;
  private readonly cellCanvas: HTMLCanvasElement;

  constructor(private readonly canvas: HTMLCanvasElement) {
    this.cellCanvas = document.createElement('canvas');
  }

  setGrid(grid: DelayDopplerGrid): void {
    this.grid = grid;
    this.magnitudes = new Float64Array(cellCount(grid));
    // One pixel per cell: x = delay, y = Doppler (row 0 at the top holds the highest Doppler).
    this.cellCanvas.width = grid.delays;
    this.cellCanvas.height = dopplerCount(grid);
    this.cells = new ImageData(grid.delays, dopplerCount(grid));
    for (const key of ['peakDelay', 'peakDoppler', 'peakSeq', 'peakMagnitude'] as const) delete this.canvas.dataset[key];
  }

  /** Returns a one-line description of the peak for the readout under the map. */
  draw(frame: HeatFrame): string {
    const grid = this.grid;
    const cells = this.cells;
    if (!grid || !cells) return '';
    // Dense magnitudes in column order, which is row-major by delay: row k holds delay k's
    // L Doppler bins.
    fillMagnitudes(frame.indices, frame.values, this.magnitudes);
    const peak = brightestCell(grid, this.magnitudes);
    const peakValue = peak?.magnitude ?? 0;
    const L = dopplerCount(grid);
    const pixels = cells.data;
    for (let k = 0; k < grid.delays; k++) {
      for (let l = 0; l < L; l++) {
        const t = 3 * heatIndex(this.magnitudes[k * L + l]!, peakValue);
        const p = 4 * ((L - 1 - l) * grid.delays + k);
        pixels[p] = this.table[t]!;
        pixels[p + 1] = this.table[t + 1]!;
        pixels[p + 2] = this.table[t + 2]!;
        pixels[p + 3] = 255;
      }
    }
    this.cellCanvas.getContext('2d')!.putImageData(cells, 0, 0);
    this.paint(grid, peak);

    const data = this.canvas.dataset;
    data.peakSeq = String(frame.seq);
    if (peak) {
      data.peakDelay = String(peak.delay);
      data.peakDoppler = String(peak.doppler);
      data.peakMagnitude = peak.magnitude.toPrecision(4);
      this.canvas.setAttribute('aria-label', `delay-Doppler map of frame ${frame.seq}; strongest cell at delay ${peak.delay}, Doppler ${peak.doppler}`);
      return `strongest reflector: delay ${peak.delay}, Doppler ${peak.doppler}, |c| ${peak.magnitude.toPrecision(3)} · ${frame.indices.length} nonzero cells`;
    }
    delete data.peakDelay;
    delete data.peakDoppler;
    delete data.peakMagnitude;
    return 'no nonzero coefficients in this frame';
  }

  private paint(grid: DelayDopplerGrid, peak: { delay: number; doppler: number } | null): void {
    const ratio = window.devicePixelRatio || 1;
    const cssWidth = this.canvas.clientWidth;
    const cssHeight = this.canvas.clientHeight;
    if (cssWidth === 0 || cssHeight === 0) return;
    if (this.canvas.width !== Math.round(cssWidth * ratio) || this.canvas.height !== Math.round(cssHeight * ratio)) {
      this.canvas.width = Math.round(cssWidth * ratio);
      this.canvas.height = Math.round(cssHeight * ratio);
    }
    const ctx = this.canvas.getContext('2d')!;
    ctx.setTransform(ratio, 0, 0, ratio, 0, 0);
    const style = getComputedStyle(this.canvas);
    const ink = style.getPropertyValue('--ink').trim() || '#222';
    const soft = style.getPropertyValue('--ink-soft').trim() || '#666';
    const paper = style.getPropertyValue('--paper-raised').trim() || '#fff';
    ctx.fillStyle = paper;
    ctx.fillRect(0, 0, cssWidth, cssHeight);

    const L = dopplerCount(grid);
    const plotW = cssWidth - AXIS_LEFT - PAD - LEGEND;
    const plotH = cssHeight - AXIS_BOTTOM - PAD;
    const cellW = plotW / grid.delays;
    const cellH = plotH / L;
    ctx.imageSmoothingEnabled = false;
    ctx.drawImage(this.cellCanvas, AXIS_LEFT, PAD, plotW, plotH);
    ctx.strokeStyle = ink;
    ctx.lineWidth = 1;
    ctx.strokeRect(AXIS_LEFT - 0.5, PAD - 0.5, plotW + 1, plotH + 1);

    // Axes: about eight ticks each way, at whole bins.
    ctx.fillStyle = soft;
    ctx.font = '11px ui-monospace, monospace';
    ctx.textAlign = 'center';
    ctx.textBaseline = 'top';
    const delayStep = Math.max(1, Math.ceil(grid.delays / 8));
    for (let k = 0; k < grid.delays; k += delayStep) ctx.fillText(String(k), AXIS_LEFT + (k + 0.5) * cellW, PAD + plotH + 4);
    ctx.fillText('delay bin', AXIS_LEFT + plotW / 2, PAD + plotH + 16);
    ctx.textAlign = 'right';
    ctx.textBaseline = 'middle';
    const dopplerStep = Math.max(1, Math.ceil(L / 8));
    for (let i = 0; i < L; i += dopplerStep) ctx.fillText(String(grid.dopplerFrom + i), AXIS_LEFT - 5, PAD + (L - 1 - i + 0.5) * cellH);
    ctx.save();
    ctx.translate(11, PAD + plotH / 2);
    ctx.rotate(-Math.PI / 2);
    ctx.textAlign = 'center';
    ctx.fillText('Doppler bin', 0, 0);
    ctx.restore();

    // Legend: the ramp from 0 to the frame's peak.
    const legendX = AXIS_LEFT + plotW + 14;
    for (let y = 0; y < plotH; y++) {
      const t = 3 * Math.round(255 * (1 - y / plotH));
      ctx.fillStyle = `rgb(${this.table[t]},${this.table[t + 1]},${this.table[t + 2]})`;
      ctx.fillRect(legendX, PAD + y, 10, 1);
    }
    ctx.strokeStyle = ink;
    ctx.strokeRect(legendX - 0.5, PAD - 0.5, 11, plotH + 1);
    ctx.fillStyle = soft;
    ctx.textAlign = 'left';
    ctx.textBaseline = 'top';
    ctx.fillText('peak', legendX - 4, PAD + plotH + 4);

    if (peak) {
      // A frame around the strongest cell, a little outside it so the cell's colour stays visible.
      const x = AXIS_LEFT + peak.delay * cellW;
      const y = PAD + (L - 1 - (peak.doppler - grid.dopplerFrom)) * cellH;
      ctx.strokeStyle = ink;
      ctx.lineWidth = 2;
      ctx.strokeRect(x - 3, y - 3, cellW + 6, cellH + 6);
    }
  }
}
