import { describe, expect, it } from 'vitest';
import { EXIT } from '../exitCodes.js';
import { CliProcess } from './processes.js';

describe('sparsewire demo', () => {
  it('shows three live streams within a few seconds, raises an alert on a burst, and stops by itself', async () => {
    const demo = new CliProcess(['demo', '--port', '0', '--for', '9', '--status-every', '2', '--burst-every', '3', '--workers', '1']);
    const url = (await demo.waitFor(/sparsewire listening on (http:\/\/\S+)/))[1]!;
    await demo.waitFor(/dashboard: http:\/\/127\.0\.0\.1:\d+\//);
    // The daemon's stream list shows the three scenarios while the demo runs.
    const streams = (await (await fetch(`${url}/v1/streams`)).json()) as unknown;
    const names = JSON.stringify(streams);
    for (const name of ['gearbox.vibration', 'range.delay-doppler', 'telemetry.channel']) expect(names).toContain(name);
    // First status lines after about 2 s: every stream has results already.
    for (const name of ['gearbox\\.vibration', 'range\\.delay-doppler', 'telemetry\\.channel']) {
      await demo.waitFor(new RegExp(`${name} +sent +\\d+ +solved +[1-9]\\d* +rel\\.residual`), 10_000);
    }
    await demo.waitFor(/noise burst on gearbox\.vibration/, 10_000);
    await demo.waitFor(/alert raised: gearbox\.vibration at #\d+, relative_residual \S+ above 0\.25/, 10_000);
    const { code, stdout } = await demo.finished;
    expect(code).toBe(EXIT.ok);
    expect(stdout).toMatch(/demo stopped\n$/);
  });
});
