/**
 * Builds the dashboard's script: the page's TypeScript bundled with its dependencies (uPlot,
 * msgpackr's browser build, the protocol codec) into one ES module, clients/web/dist/app.js,
 * next to a copy of uPlot's style sheet. The daemon serves clients/web/ as it is, so
 * index.html and style.css stay where they are and load dist/. Run by `npm run build:web`, and
 * by `npm install` / `npm ci` through the `prepare` script.
 */
import { build, type Plugin } from 'esbuild';
import { copyFile, mkdir, mkdtemp, readdir, rename, rm } from 'node:fs/promises';
import { createRequire } from 'node:module';
import { dirname, join } from 'node:path';
import { fileURLToPath } from 'node:url';

export const WEB_DIR = dirname(fileURLToPath(import.meta.url));
export const DIST_DIR = join(WEB_DIR, 'dist');

const require = createRequire(import.meta.url);

/**
 * zod (which the protocol's schemas use) re-exports every message language it ships; the page
 * only ever reports in English, so the bundle gets the English one alone (about 250 KiB less).
 */
const englishOnlyZodMessages: Plugin = {
  name: 'english-only-zod-messages',
  setup(b) {
    b.onResolve({ filter: /^\.\.\/locales\/index\.js$/ }, (args) =>
      /[\\/]zod[\\/]v4[\\/](classic|core)[\\/]/.test(args.importer) ? { path: 'zod-locales-en', namespace: 'english-only' } : undefined,
    );
    b.onLoad({ filter: /.*/, namespace: 'english-only' }, () => ({
      contents: `export { default as en } from ${JSON.stringify(require.resolve('zod/v4/locales/en.js'))};`,
      loader: 'js',
      resolveDir: WEB_DIR,
    }));
  },
};

export interface BuildReport {
  outDir: string;
  /** Bytes of the bundled script. */
  scriptBytes: number;
}

/**
 * Builds into a scratch folder beside dist/ and then renames each file into place, so a daemon
 * serving the page (or a second build running at the same time) never sees a half-written file.
 */
export async function buildDashboard(): Promise<BuildReport> {
  await mkdir(DIST_DIR, { recursive: true });
  const scratch = await mkdtemp(join(WEB_DIR, '.build-'));
  try {
    const result = await build({
      entryPoints: [join(WEB_DIR, 'src', 'main.ts')],
      outfile: join(scratch, 'app.js'),
      bundle: true,
      format: 'esm',
      platform: 'browser',
      target: ['chrome110', 'firefox115', 'safari16'],
      minify: true,
      sourcemap: 'linked',
      metafile: true,
      logLevel: 'warning',
      plugins: [englishOnlyZodMessages],
    });
    await copyFile(require.resolve('uplot/dist/uPlot.min.css'), join(scratch, 'uPlot.min.css'));
    for (const file of await readdir(scratch)) await rename(join(scratch, file), join(DIST_DIR, file));
    const script = Object.entries(result.metafile.outputs).find(([p]) => p.endsWith('app.js'))![1];
    return { outDir: DIST_DIR, scriptBytes: script.bytes };
  } finally {
    await rm(scratch, { recursive: true, force: true });
  }
}

if (process.argv[1] && fileURLToPath(import.meta.url) === process.argv[1]) {
  const report = await buildDashboard();
  console.log(`dashboard built into ${report.outDir} (app.js ${(report.scriptBytes / 1024).toFixed(0)} KiB)`);
}
