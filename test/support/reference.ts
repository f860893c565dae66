/** Loads test/fixtures/reference.json, written by test/fixtures/make_fixtures.py (numpy/scipy). */
import { readFileSync } from 'node:fs';
import { fileURLToPath } from 'node:url';

const path = fileURLToPath(new URL('../fixtures/reference.json', import.meta.url));

// Each test names the section it reads and its shape; make_fixtures.py documents them.
export const reference: Record<string, unknown> & { meta: Record<string, string> } = JSON.parse(readFileSync(path, 'utf8'));

export function section<T>(key: string): T {
  if (!(key in reference)) throw new Error(`reference.json has no section "${key}"; rerun npm run fixtures`);
  return reference[key] as T;
}
