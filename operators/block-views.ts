/**
 * Views of consecutive blocks of a caller's buffer, so a transform can read or write a block
 * in place (fft.js always indexes from 0). Creating views allocates, so they are remembered
 * per buffer: a solver that reuses its work buffers gets allocation-free calls after the
 * first. The map is weak, so remembering a buffer never keeps it alive.
 */
export class BlockViews {
  private readonly remembered = new WeakMap<Float64Array, Float64Array[]>();

  /** blockLength: entries per block (2·complex length); blocks: how many. */
  constructor(
    private readonly blockLength: number,
    private readonly blocks: number,
  ) {}

  of(buffer: Float64Array): Float64Array[] {
    let views = this.remembered.get(buffer);
    if (views === undefined) {
      views = new Array<Float64Array>(this.blocks);
      for (let b = 0; b < this.blocks; b++) views[b] = buffer.subarray(b * this.blockLength, (b + 1) * this.blockLength);
      this.remembered.set(buffer, views);
    }
    return views;
  }
}
