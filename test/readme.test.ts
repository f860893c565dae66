/** The README's protocol schema is the one the server validates with (it cannot drift). */
import { readFileSync } from 'node:fs';
import { describe, expect, it } from 'vitest';
import { ERROR_CODES, protocolJsonSchema } from '../ingest/service/protocol.js';

describe('README', () => {
  it('embeds the feed protocol JSON Schema generated from the validators', () => {
    const readme = readFileSync('README.md', 'utf8');
    const block = /<summary>JSON Schema of client messages[\s\S]*?```json\n([\s\S]*?)\n```/.exec(readme);
    expect(block, 'README has the schema block').not.toBeNull();
    expect(JSON.parse(block![1])).toEqual(protocolJsonSchema());
  });

  it('quickstart has exactly the two commands', () => {
    const readme = readFileSync('README.md', 'utf8');
    const quick = /## Quickstart[\s\S]*?```sh\n([\s\S]*?)```/.exec(readme)?.[1] ?? '';
    expect(quick.trim().split('\n').map((l) => l.replace(/#.*$/, '').trim())).toEqual(['npm ci && npm start', 'npm test']);
  });

  it('CI runs the quickstart\'s install and test commands and nothing else', () => {
    const script = readFileSync('.ci/run', 'utf8');
    const commands = script
      .split('\n')
      .map((l) => l.trim())
      .filter((l) => l && !l.startsWith('#') && !/^(set |cd |echo |export )/.test(l));
    expect(commands.map((c) => c.split(/\s+/).slice(0, 2).join(' '))).toEqual(['npm ci', 'npm test']);
  });

  it('lists every error code of the feed protocol', () => {
    const readme = readFileSync('README.md', 'utf8');
    const list = /Codes: ((?:`[A-Z_]+`,?\s*)+)/.exec(readme)?.[1] ?? '';
    expect(new Set([...list.matchAll(/`([A-Z_]+)`/g)].map((m) => m[1]))).toEqual(new Set(Object.keys(ERROR_CODES)));
  });
});
