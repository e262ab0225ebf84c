/**
 * Builds the dashboard into clients/web/dist/: the page's TypeScript bundled with its
 * dependencies (uPlot, msgpackr's browser build, the protocol codec) into one ES module, plus
 * the HTML and style sheets. Run by `npm run build:web`, and by `npm install` through `prepare`.
 */
import { build, type Plugin } from 'esbuild';
import { copyFile, mkdir, rm } from 'node:fs/promises';
import { createRequire } from 'node:module';
import { dirname, join } from 'node:path';
import { fileURLToPath } from 'node:url';

export const WEB_DIR = dirname(fileURLToPath(import.meta.url));
export const DIST_DIR = join(WEB_DIR, 'dist');

export interface BuildReport {
  outDir: string;
  /** Bytes of the bundled script. */
  scriptBytes: number;
}

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

const require = createRequire(import.meta.url);

export async function buildDashboard(outDir = DIST_DIR): Promise<BuildReport> {
  await rm(outDir, { recursive: true, force: true });
  await mkdir(outDir, { recursive: true });
  const result = await build({
    entryPoints: [join(WEB_DIR, 'src', 'main.ts')],
    outfile: join(outDir, 'app.js'),
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
  await Promise.all([
    copyFile(join(WEB_DIR, 'index.html'), join(outDir, 'index.html')),
    copyFile(join(WEB_DIR, 'style.css'), join(outDir, 'style.css')),
    copyFile(require.resolve('uplot/dist/uPlot.min.css'), join(outDir, 'uPlot.min.css')),
  ]);
  const script = result.metafile.outputs[Object.keys(result.metafile.outputs).find((p) => p.endsWith('app.js'))!]!;
  return { outDir, scriptBytes: script.bytes };
}

if (process.argv[1] && fileURLToPath(import.meta.url) === process.argv[1]) {
  const report = await buildDashboard();
  console.log(`dashboard built into ${report.outDir} (app.js ${(report.scriptBytes / 1024).toFixed(0)} KiB)`);
}
