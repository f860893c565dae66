/**
 * Subject tokens: any vignette or run name becomes one NATS subject token and back, and never
 * reaches another subject. The token grammar checked is the NATS documentation's ("Subject-Based
 * Messaging": tokens are separated by `.`, `*` and `>` are wildcards, whitespace is not allowed).
 */
import { fc, test } from '@fast-check/vitest';
import { describe, expect, it } from 'vitest';
import { consumerName, decodeToken, encodeToken, inputFilter, inputSubject, parseInputSubject } from '../../../ingest/broker/subjects.js';

const layout = { prefix: 'plumbline', event: 'harbour trials' };

describe('subject tokens', () => {
  test.prop([fc.string({ minLength: 1, maxLength: 40, unit: 'grapheme' })])('round-trip and stay one token', (name) => {
    const token = encodeToken(name);
    expect(token).toMatch(/^[A-Za-z0-9_~-]+$/);
    expect(decodeToken(token)).toBe(name);
    expect(parseInputSubject(layout, inputSubject(layout, name, name))).toEqual({ vignette: name, run: name });
  });

  it('encodes the characters NATS gives a meaning to', () => {
    expect(encodeToken('S1.L1')).toBe('S1~2EL1');
    expect(encodeToken('live *7>')).toBe('live~20~2A7~3E');
    expect(encodeToken('S3-L1')).toBe('S3-L1');
    expect(inputSubject(layout, 'S3-L1', 'live-1')).toBe('plumbline.harbour~20trials.in.S3-L1.live-1');
    expect(inputFilter(layout, 'S3-L1')).toBe('plumbline.harbour~20trials.in.S3-L1.*');
    expect(consumerName('shard a', 'S3-L1')).toBe('shard~20a_S3-L1');
  });

  it('refuses what is not a subject of the layout', () => {
    expect(parseInputSubject(layout, 'plumbline.other.in.S1-L1.live-1')).toBeUndefined();
    expect(parseInputSubject(layout, 'plumbline.harbour~20trials.in.S1-L1')).toBeUndefined();
    expect(parseInputSubject(layout, 'plumbline.harbour~20trials.in.S1-L1.live~2')).toBeUndefined();
    expect(() => encodeToken('')).toThrow(RangeError);
  });
});
