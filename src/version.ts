import { readFileSync } from 'node:fs';

/** kinhue's version, read once from package.json (dist/ and src/ both sit one level below it). */
export const VERSION: string = (JSON.parse(readFileSync(new URL('../package.json', import.meta.url), 'utf8')) as { version: string })
  .version;
