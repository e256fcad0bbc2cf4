/**
 * `npm run size` (after `vite build`): the gzipped size of the JavaScript the board route needs
 * before it can draw — the entry chunk, the board view's lazy chunk, and every chunk either of
 * them imports statically (followed through `imports` in dist/.vite/manifest.json; dynamic
 * imports are left out, they load later). Fails when it is over the budget.
 *
 *   tsx scripts/bundle-size.ts [--route src/features/board/components/board-page.tsx] [--budget-kb 250]
 *
 * kB here are 1000 bytes; gzip at zlib's default level (what a compressing server sends).
 */
import fs from 'node:fs';
import path from 'node:path';
import { fileURLToPath } from 'node:url';
import { gzipSync } from 'node:zlib';

interface ManifestChunk {
  file: string;
  isEntry?: boolean;
  imports?: string[];
  dynamicImports?: string[];
  css?: string[];
}

const root = path.resolve(path.dirname(fileURLToPath(import.meta.url)), '..');
const dist = path.join(root, 'dist');
const arg = (name: string, dflt: string) => {
  const i = process.argv.indexOf(name);
  return i >= 0 && process.argv[i + 1] ? process.argv[i + 1]! : dflt;
};
const route = arg('--route', 'src/features/board/components/board-page.tsx');
const budgetKb = Number(arg('--budget-kb', '250'));

function fail(msg: string): never {
  console.error(`[size] ${msg}`);
  process.exit(1);
}

const manifestPath = path.join(dist, '.vite', 'manifest.json');
if (!fs.existsSync(manifestPath)) fail(`${path.relative(root, manifestPath)} is missing: run \`vite build\` first (build.manifest must be on in vite.config.ts)`);
const manifest = JSON.parse(fs.readFileSync(manifestPath, 'utf8')) as Record<string, ManifestChunk>;

const entries = Object.entries(manifest).filter(([, c]) => c.isEntry);
if (entries.length !== 1) fail(`expected one entry chunk in the manifest, found ${entries.length}`);
if (!manifest[route]) fail(`no chunk for ${route} in the manifest (is it a lazy route of the router?)`);

/** The chunk and everything it imports statically, each key once. */
function closure(start: string, seen = new Set<string>()): Set<string> {
  if (seen.has(start)) return seen;
  const c = manifest[start];
  if (!c) fail(`manifest names ${start} as an import but has no such chunk`);
  seen.add(start);
  for (const i of c.imports ?? []) closure(i, seen);
  return seen;
}

const keys = closure(route, closure(entries[0]![0]));
const rows = [...keys]
  .map((k) => {
    const file = manifest[k]!.file;
    const bytes = fs.readFileSync(path.join(dist, file));
    return { file, raw: bytes.length, gz: gzipSync(bytes).length };
  })
  .filter((r) => r.file.endsWith('.js'))
  .sort((a, b) => b.gz - a.gz);

const kb = (n: number) => (n / 1000).toFixed(1).padStart(8);
console.log(`[size] initial JavaScript of ${route} (entry + route chunk + static imports):`);
for (const r of rows) console.log(`[size] ${kb(r.gz)} kB gz  ${kb(r.raw)} kB raw  ${r.file}`);
const total = rows.reduce((s, r) => s + r.gz, 0);
const totalRaw = rows.reduce((s, r) => s + r.raw, 0);
console.log(`[size] ${kb(total)} kB gz  ${kb(totalRaw)} kB raw  total (budget ${budgetKb} kB gz)`);
if (total > budgetKb * 1000) fail(`over budget by ${((total - budgetKb * 1000) / 1000).toFixed(1)} kB gz`);
console.log('[size] within budget');
