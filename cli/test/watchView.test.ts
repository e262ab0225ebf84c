import { describe, expect, it } from 'vitest';
import { decodeResult } from '../../clients/index.js';
import { float64ToBin, uint32ToBin, type ResultMessage } from '../../protocol/index.js';
import { noticeJson, resultJson, topCoefficients, WatchTable } from '../watchView.js';

const evidence = {
  relative_residual: 0.0123, residual: 0.1, iterations: 7, certificate_kind: 'residual', certificate: 0,
  converged: true, support_size: 3, added: 1, removed: 0, recoverability: 'safe', solve_ms: 1,
};
const message: ResultMessage = {
  v: 1, type: 'result', stream: 'bench.vib', seq: 41, time: 1000, solved_at: 1010, flags: ['support_churn'], evidence,
  // Magnitudes 5 (3-4i), 1 and 2: the top two are indices 9 and 2.
  top_k: { indices: uint32ToBin(Uint32Array.from([2, 9, 4])), values: float64ToBin(Float64Array.from([0, 2, 3, -4, 1, 0])) },
};

describe('watch views', () => {
  it('orders the top coefficients by magnitude', () => {
    expect(topCoefficients(decodeResult(message), 2)).toEqual([
      { index: 9, re: 3, im: -4, abs: 5 },
      { index: 2, re: 0, im: 2, abs: 2 },
    ]);
  });

  it('writes JSON lines with lag and the top coefficients', () => {
    const line = JSON.parse(resultJson(decodeResult(message), 1, 1250));
    expect(line).toMatchObject({ event: 'result', stream: 'bench.vib', seq: 41, lag_ms: 250, flags: ['support_churn'], top: [{ index: 9, abs: 5 }] });
    const event = JSON.parse(noticeJson({ v: 1, type: 'stream_event', stream: 'bench.vib', event: 'closed' }, 5));
    expect(event).toEqual({ event: 'stream', change: 'closed', stream: 'bench.vib', received_at: 5 });
  });

  it('renders one row per stream and the alerts still raised', () => {
    const table = new WatchTable();
    table.result(decodeResult(message), 1250);
    table.result(decodeResult({ ...message, seq: 42 }), 1300);
    table.notice({ v: 1, type: 'alert', stream: 'bench.vib', seq: 42, rule: 0, metric: 'iterations', state: 'raised', value: 300, limit: 200 });
    const text = table.render(2);
    expect(text).toMatch(/^stream +seq +results +lag +rel\.res +iter +support +flags +top 2$/m);
    expect(text).toMatch(/^bench\.vib +#42 +2 +300 ms +0\.0123 +7 +3 +support_churn +9:5\.00 2:2\.00$/m);
    expect(text).toMatch(/bench\.vib: iterations above 200 since #42/);
    table.notice({ v: 1, type: 'alert', stream: 'bench.vib', seq: 50, rule: 0, metric: 'iterations', state: 'cleared', value: 10, limit: 100 });
    expect(table.render(2)).toMatch(/alerts raised: none/);
  });
});
