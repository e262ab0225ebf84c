import { afterEach, describe, expect, it, vi } from 'vitest';
import { EXIT } from '../exitCodes.js';
import { main } from '../main.js';

/** The dispatcher in-process: help for every command, and wrong command lines. */
function capture() {
  let stdout = '';
  let stderr = '';
  vi.spyOn(process.stdout, 'write').mockImplementation((chunk) => ((stdout += String(chunk)), true));
  vi.spyOn(process.stderr, 'write').mockImplementation((chunk) => ((stderr += String(chunk)), true));
  return { out: () => stdout, err: () => stderr };
}

afterEach(() => vi.restoreAllMocks());

describe('command line', () => {
  it('every command answers --help (and help <command>) with its usage and exit 0', async () => {
    for (const command of ['serve', 'demo', 'send', 'watch', 'record', 'replay', 'inspect', 'load']) {
      const io = capture();
      expect(await main([command, '--help']), command).toBe(EXIT.ok);
      expect(await main(['help', command]), command).toBe(EXIT.ok);
      vi.restoreAllMocks();
      expect(io.out().match(new RegExp(`usage: sparsewire ${command}`, 'g')), command).toHaveLength(2);
    }
    const io = capture();
    expect(await main(['--help'])).toBe(EXIT.ok);
    expect(await main([])).toBe(EXIT.usage);
    expect(await main(['--version'])).toBe(EXIT.ok);
    vi.restoreAllMocks();
    expect(io.out()).toMatch(/replay --check found results that differ/);
    expect(io.out()).toMatch(/sparsewire \d+\.\d+\.\d+/);
  });

  it('wrong command lines exit 2 and say what is wrong', async () => {
    const cases: Array<[string[], RegExp]> = [
      [['transmogrify'], /unknown command "transmogrify"/],
      [['watch', '--top', 'many'], /--top must be a number/],
      [['watch', '--top', '0'], /--top must be at least 1/],
      [['send', '--feed', 'turbine'], /--feed must be one of gearbox, range, telemetry/],
      [['send'], /give exactly one of --feed or --file/],
      [['send', '--feed', 'gearbox', '--colour', 'red'], /Unknown option '--colour'/],
      [['record'], /--out <path> is required/],
      [['replay'], /give exactly one recording file/],
      [['replay', 'a.swrec', '--set', 'oops'], /--set wants field=value/],
      [['replay', 'a.swrec', '--speed', '0'], /--speed must be above 0/],
      [['inspect', 'a', 'b'], /give exactly one recording file/],
      [['watch', '--daemon', 'not a url'], /--daemon must be an address/],
      [['serve', '--port', 'x'], /--port must be a whole number/],
    ];
    for (const [args, message] of cases) {
      const io = capture();
      const code = await main(args);
      vi.restoreAllMocks();
      expect(code, args.join(' ')).toBe(EXIT.usage);
      expect(io.err(), args.join(' ')).toMatch(message);
    }
  });
});
