/**
 * The live recovery of the chosen stream, drawn for its kind:
 * - spectrum: magnitude of the recovered coefficients over frequency bins, and beside it the
 *   reconstructed waveform;
 * - delay-Doppler: the heat map (heat-map.ts), strongest cell framed;
 * - signal: the reconstructed signal over time, and beside it the basis coefficients.
 * Charts are rebuilt when the chosen stream (or its declaration) changes, and fed the latest
 * result otherwise.
 */
import uPlot from 'uplot';
import { binToFloat64, sparseFromWire, type SparseVector } from '../../../../protocol/bin.js';
import type { ResultMessage } from '../../../../protocol/messages.js';
import { fillMagnitudes, splitComplex } from '../magnitudes.js';
import type { RecoveryShape } from '../stream-kind.js';
import { axisStyle, cssColor, mountChart } from './charts.js';
import { HeatMapView } from './heat-map.js';

export interface RecoveryElements {
  caption: HTMLElement;
  plot: HTMLElement;
  heat: HTMLCanvasElement;
  readout: HTMLElement;
  side: HTMLElement;
  sideCaption: HTMLElement;
  sidePlot: HTMLElement;
}

const MAIN_HEIGHT = 300;
const NO_COEFFICIENTS: SparseVector = { indices: new Uint32Array(0), values: new Float64Array(0) };
const SIDE_HEIGHT = 300;

/** Magnitudes by index (stems), for spectra and basis coefficients. */
class MagnitudeChart {
  readonly chart: uPlot;
  private readonly x: Float64Array;
  private readonly y: Float64Array;

  constructor(host: HTMLElement, size: number, height: number, xLabel: string, colour: string) {
    this.x = Float64Array.from({ length: size }, (_, i) => i);
    this.y = new Float64Array(size);
    this.chart = mountChart(
      host,
      {
        height,
        scales: { x: { time: false }, y: { range: (_u, _min, max) => [0, max > 0 ? max * 1.08 : 1] } },
        axes: [axisStyle(xLabel), { ...axisStyle('|c|'), size: 56 }],
        series: [
          { label: xLabel },
          { label: '|c|', stroke: colour, fill: colour, width: 1, paths: uPlot.paths.bars!({ size: [0.7, 6] }), points: { show: false } },
        ],
        legend: { show: false },
        cursor: { show: false },
      },
      [this.x, this.y],
    );
  }

  draw(coefficients: SparseVector): void {
    fillMagnitudes(coefficients.indices, coefficients.values, this.y);
    this.chart.setData([this.x, this.y]);
  }
}

/**
 * A complex signal over sample index: real part, imaginary part when there is one, and — when
 * the measurements are time samples — the measured samples as dots (real part), so a reader
 * sees how well the reconstruction passes through what was actually measured.
 */
class SignalChart {
  readonly chart: uPlot;
  private readonly x: Float64Array;
  private readonly re: Float64Array;
  private readonly im: Float64Array;
  private readonly samples: Float64Array;
  /** Measured values at their times, null elsewhere (uPlot draws no point there). */
  private readonly measured: (number | null)[];
  private readonly y: Float64Array | null;

  constructor(host: HTMLElement, size: number, height: number, private readonly sampleTimes: Uint32Array | null) {
    this.x = Float64Array.from({ length: size }, (_, i) => i);
    this.re = new Float64Array(size);
    this.im = new Float64Array(size);
    this.samples = new Float64Array(2 * size);
    this.measured = new Array<number | null>(size).fill(null);
    this.y = sampleTimes ? new Float64Array(2 * sampleTimes.length) : null;
    this.chart = mountChart(
      host,
      {
        height,
        scales: { x: { time: false } },
        axes: [axisStyle('sample'), { ...axisStyle(), size: 56 }],
        series: [
          { label: 'sample' },
          { label: 'real part', stroke: cssColor('--sea', '#1f6e6a'), width: 1.5, points: { show: false } },
          { label: 'imaginary part', stroke: cssColor('--amber', '#b97d0e'), width: 1, points: { show: false } },
          {
            label: 'measured samples',
            stroke: cssColor('--ink', '#222'),
            fill: cssColor('--paper-raised', '#fff'),
            paths: () => null,
            points: { show: true, size: 6, width: 1.5 },
            show: sampleTimes !== null,
          },
        ],
        legend: { show: true, live: false },
        cursor: { show: false },
      },
      [this.x, this.re, this.im, this.measured],
    );
  }

  /**
   * Returns how many measured samples were drawn, or -1 when the signal or measurements do not
   * fit the declared sizes (nothing drawn then).
   */
  draw(signal: Uint8Array, y: Uint8Array | undefined): number {
    if (signal.byteLength !== this.samples.byteLength) return -1;
    if (y && this.y && y.byteLength !== this.y.byteLength) return -1;
    binToFloat64(signal, 'signal', this.samples);
    splitComplex(this.samples, this.re, this.im);
    let imaginary = false;
    for (let i = 0; i < this.im.length && !imaginary; i++) imaginary = Math.abs(this.im[i]!) > 1e-12 * (1 + Math.abs(this.re[i]!));
    if (this.chart.series[2]!.show !== imaginary) this.chart.setSeries(2, { show: imaginary });
    let drawn = 0;
    if (this.sampleTimes && this.y && y) {
      binToFloat64(y, 'y', this.y);
      this.sampleTimes.forEach((t, i) => (this.measured[t] = this.y![2 * i]!));
      drawn = this.sampleTimes.length;
    }
    this.chart.setData([this.x, this.re, this.im, this.measured]);
    return drawn;
  }
}

export class RecoveryView {
  private shape: RecoveryShape | null = null;
  private main: MagnitudeChart | SignalChart | null = null;
  private side: MagnitudeChart | SignalChart | null = null;
  private readonly heat: HeatMapView;

  constructor(private readonly el: RecoveryElements) {
    this.heat = new HeatMapView(el.heat);
  }

  /** Sets up the panels for a stream's shape (call when the chosen stream or its declaration changes). */
  show(shape: RecoveryShape): void {
    this.main?.chart.destroy();
    this.side?.chart.destroy();
    this.main = null;
    this.side = null;
    this.shape = shape;
    const el = this.el;
    el.heat.hidden = shape.kind !== 'delay_doppler';
    el.plot.hidden = shape.kind === 'delay_doppler';
    // Beside a signal in the identity basis, its coefficients would only repeat it.
    el.side.hidden = shape.kind === 'delay_doppler' || shape.kind === 'coefficients' || (shape.kind === 'signal' && shape.basis === 'identity');
    el.readout.textContent = 'waiting for the first result…';
    const sea = cssColor('--sea', '#1f6e6a');
    const indigo = cssColor('--indigo', '#3d4f8e');
    switch (shape.kind) {
      case 'spectrum':
        el.caption.textContent = 'Recovered spectrum: magnitude by frequency bin';
        el.sideCaption.textContent = 'Reconstructed waveform';
        this.main = new MagnitudeChart(el.plot, shape.bins, MAIN_HEIGHT, 'frequency bin', sea);
        this.side = new SignalChart(el.sidePlot, shape.bins, SIDE_HEIGHT, shape.sampleTimes);
        break;
      case 'delay_doppler':
        el.caption.textContent = 'Delay × Doppler map of recovered coefficients';
        this.heat.setGrid(shape.grid);
        break;
      case 'signal':
        el.caption.textContent = 'Reconstructed signal over time';
        el.sideCaption.textContent = `${shape.basis} coefficients`;
        this.main = new SignalChart(el.plot, shape.samples, MAIN_HEIGHT, shape.sampleTimes);
        if (shape.basis !== 'identity') this.side = new MagnitudeChart(el.sidePlot, shape.samples, SIDE_HEIGHT, 'coefficient', indigo);
        break;
      case 'coefficients':
        el.caption.textContent = 'Recovered coefficients';
        break;
    }
  }

  draw(result: ResultMessage): void {
    const shape = this.shape;
    if (!shape) return;
    // An empty support travels as no `coefficients` at all (binary fields are never empty).
    const coefficients = result.coefficients ? sparseFromWire(result.coefficients) : result.evidence.support_size === 0 ? NO_COEFFICIENTS : null;
    let readout = `frame ${result.seq} · support ${result.evidence.support_size}`;
    if (shape.kind === 'delay_doppler') {
      if (coefficients) readout = `frame ${result.seq} · ${this.heat.draw({ seq: result.seq, ...coefficients })}`;
    } else {
      for (const chart of [this.main, this.side]) {
        if (chart instanceof MagnitudeChart && coefficients) chart.draw(coefficients);
        if (chart instanceof SignalChart && result.signal) {
          const drawn = chart.draw(result.signal, result.y);
          if (drawn < 0) readout += ' · signal or measurements do not match the declared sizes';
          else if (drawn > 0) readout += ` · ${drawn} measured samples shown as dots`;
        }
      }
    }
    this.el.readout.textContent = readout;
  }
}
