import { BEHIND_POLICIES, type BehindPolicy } from '../protocol/index.js';
import { Subscriber } from '../clients/index.js';
import { DAEMON_OPTIONS, flag, num, str, type CommandSpec, type OptionValues } from './args.js';
import { EXIT } from './exitCodes.js';
import { connectionOptions, stopWhen } from './runtime.js';
import { noticeJson, noticeLine, resultJson, resultLine, WatchTable } from './watchView.js';

export const watchSpec: CommandSpec = {
  name: 'watch',
  summary: 'follow streams live: top coefficients, quality flags, alerts and lag',
  description: [
    'Subscribes to the streams matching a pattern and shows every result as it arrives: its lag',
    '(now minus the frame time), the evidence (relative residual, iterations, support), quality',
    'flags, and the largest coefficients; alerts, missed-result notices and stream events too.',
    'On a terminal the view is a table redrawn in place; otherwise one line per event. With',
    '--json, one JSON object per line (for piping). Runs until Ctrl-C, --for or --count.',
  ].join('\n'),
  options: [
    ...DAEMON_OPTIONS,
    { name: 'streams', kind: 'string', value: '<pattern>', help: "Stream name or pattern, '*' matching any run of characters (default '*')." },
    { name: 'top', kind: 'int', value: '<k>', min: 1, help: 'How many of the largest coefficients to show (default 5).' },
    { name: 'json', kind: 'flag', help: 'One JSON object per line instead of text.' },
    { name: 'behind', kind: 'string', value: '<policy>', choices: BEHIND_POLICIES, help: 'What the daemon does when this viewer falls behind (default keep_latest).' },
    { name: 'for', kind: 'number', value: '<seconds>', min: 0, help: 'Stop after this long.' },
    { name: 'count', kind: 'int', value: '<n>', min: 1, help: 'Stop after this many results.' },
  ],
};

export async function watchCommand(values: OptionValues): Promise<number> {
  const connection = connectionOptions(values);
  const k = num(values, 'top') ?? 5;
  const json = flag(values, 'json');
  const table = !json && process.stdout.isTTY ? new WatchTable() : null;
  const limit = num(values, 'count');
  const stop = stopWhen(num(values, 'for'));
  const subscriber = new Subscriber(connection);
  let results = 0;
  const out = (line: string) => process.stdout.write(`${line}\n`);
  subscriber.on('result', (r) => {
    if (limit !== undefined && results >= limit) return; // results still in flight after --count
    const now = Date.now();
    results++;
    if (json) out(resultJson(r, k, now));
    else if (table) table.result(r, now);
    else out(resultLine(r, k, now));
    if (limit !== undefined && results >= limit) stop.abort();
  });
  for (const event of ['alert', 'missed', 'streamEvent'] as const) {
    subscriber.on(event, (msg) => {
      if (json) out(noticeJson(msg, Date.now()));
      else if (table) table.notice(msg);
      else out(noticeLine(msg));
    });
  }
  subscriber.on('garbled', (err) => process.stderr.write(`unreadable message from the daemon skipped: ${err.message}\n`));
  subscriber.on('disconnected', (info) => {
    if (info.retryInMs !== null && !json) process.stderr.write(`connection lost; reconnecting in ${Math.round(info.retryInMs)} ms\n`);
  });
  let redraw: NodeJS.Timeout | null = null;
  try {
    await subscriber.connect();
    await subscriber.subscribe({
      streams: str(values, 'streams') ?? '*',
      want: ['top_k', 'quality', 'alerts'],
      topK: k,
      whenBehind: (str(values, 'behind') as BehindPolicy | undefined) ?? 'keep_latest',
    });
    if (table) redraw = setInterval(() => process.stdout.write(`\x1b[H\x1b[2J${table.render(k)}\n`), 500);
    await stop.stopped;
  } finally {
    if (redraw) clearInterval(redraw);
    stop.dispose();
    await subscriber.close();
  }
  if (!json) process.stderr.write(`watched ${results} results\n`);
  return EXIT.ok;
}
