// Runs every bench/*.bench.js in name order, each in its own Node process, and prints its figures.
// Benches import the built package from dist/ (built by `npm install` or `npm test`).
import { spawnSync } from 'node:child_process';
import { existsSync, readdirSync } from 'node:fs';
import { dirname, join } from 'node:path';
import { fileURLToPath } from 'node:url';

const here = dirname(fileURLToPath(import.meta.url));
if (!existsSync(join(here, '..', 'dist', 'index.js'))) {
  console.error('dist/ is missing: build first with `npm install` or `npx tsc -p tsconfig.json`, then run `npm run bench` again.');
  process.exit(2);
}

const only = process.argv.slice(2);
const files = readdirSync(here)
  .filter((f) => f.endsWith('.bench.js'))
  .filter((f) => only.length === 0 || only.some((o) => f.includes(o)))
  .sort();
let failed = 0;
for (const file of files) {
  console.log(`\n== ${file} ==`);
  const result = spawnSync(process.execPath, [join(here, file)], { stdio: 'inherit' });
  if (result.status !== 0) {
    failed++;
    console.log(`(${file} ended with ${result.signal ?? `exit code ${result.status}`})`);
  }
}
if (files.length === 0) console.log('no bench/*.bench.js files found');
process.exitCode = failed > 0 ? 1 : 0;
