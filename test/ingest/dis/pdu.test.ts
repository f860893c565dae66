/**
 * The Entity State PDU decoder against two independent writers: the npm `open-dis` 1.3.6 encoders
 * (dis6 and dis7 builds) and PDUs written byte by byte from the field table (hand-built.ts); then
 * every error code with its byte offset, bundles, and fuzzing with fast-check (fixed seeds).
 */
import { fc, test as propTest } from '@fast-check/vitest';
import { describe, expect, it } from 'vitest';
import { decodeEntityStatePdu, DisPduError, splitDatagram, type DisPduErrorCode } from '../../../ingest/dis/pdu.js';
import { handBuiltPdu } from './hand-built.js';
import { encodeWith, loadOpenDis, type OpenDisRecord } from './open-dis.js';

const f32 = (x: number) => Math.fround(x);
const LOCATION: [number, number, number] = [3771793.968, 140253.342, 5124304.349];

function expectError(fn: () => unknown, code: DisPduErrorCode, offset: number): void {
  try {
    fn();
  } catch (e) {
    expect(e).toBeInstanceOf(DisPduError);
    expect((e as DisPduError).code).toBe(code);
    expect((e as DisPduError).offset).toBe(offset);
    expect((e as DisPduError).message).toContain(`byte ${offset}`);
    return;
  }
  throw new Error(`expected ${code}`);
}

/** Fill an open-dis EntityStatePdu with distinctive values (field names as open-dis spells them). */
function fillOpenDis(pdu: OpenDisRecord, version: 6 | 7, records: number, makeRecord: () => OpenDisRecord): void {
  const set = (obj: unknown, values: Record<string, unknown>) => Object.assign(obj as object, values);
  pdu.exerciseID = 9;
  pdu.timestamp = 0x8000_0001; // half past, absolute
  if (version === 6) {
    pdu.pduLength = 144 + 16 * records;
    set(pdu.entityID, { site: 301, application: 4002, entity: 65535 });
    pdu.numberOfArticulationParameters = records;
    pdu.articulationParameters = Array.from({ length: records }, makeRecord);
  } else {
    pdu.length = 144 + 16 * records;
    pdu.pduStatus = 0x05;
    set(pdu.entityID, { siteID: 301, applicationID: 4002, entityID: 65535 });
    pdu.numberOfVariableParameters = records;
    pdu.variableParameters = Array.from({ length: records }, makeRecord);
  }
  pdu.forceId = 2;
  // dis6 spells the field `spec`, dis7 `specific`
  const specific = version === 6 ? 'spec' : 'specific';
  set(pdu.entityType, { entityKind: 1, domain: 3, country: 225, category: 61, subcategory: 2, [specific]: 3, extra: 4 });
  set(pdu.alternativeEntityType, { entityKind: 1, domain: 3, country: 1, category: 2, subcategory: 3, [specific]: 4, extra: 5 });
  set(pdu.entityLinearVelocity, { x: 1.25, y: -2.5, z: 0.1 });
  set(pdu.entityLocation, { x: LOCATION[0], y: LOCATION[1], z: LOCATION[2] });
  set(pdu.entityOrientation, { psi: 0.5, theta: -0.25, phi: 3.0 });
  pdu.entityAppearance = 0x00010002;
  const dr = pdu.deadReckoningParameters as OpenDisRecord;
  dr.deadReckoningAlgorithm = 4;
  set(dr.entityLinearAcceleration, { x: 0.5, y: 0.25, z: -9.75 });
  set(dr.entityAngularVelocity, { x: 0.01, y: 0.02, z: 0.03 });
  const marking = pdu.marking as OpenDisRecord;
  marking.characterSet = 1;
  marking.characters = [...'PLB-7'].map((c) => c.charCodeAt(0)).concat(Array(6).fill(0));
  pdu.capabilities = 0xdeadbeef | 0;
}

for (const version of [6, 7] as const) {
  describe(`against open-dis ${version === 6 ? 'dis6' : 'dis7'} (npm open-dis 1.3.6, an independent encoder)`, () => {
    const dis = loadOpenDis(version);
    const makeRecord = () => new ((version === 6 ? dis.ArticulationParameter : dis.VariableParameter) as new () => OpenDisRecord)();

    for (const records of [0, 3]) {
      it(`decodes every fixed field of a PDU that open-dis encoded (${records} variable-parameter records)`, () => {
        const pdu = new dis.EntityStatePdu();
        fillOpenDis(pdu, version, records, makeRecord);
        const bytes = encodeWith(dis, pdu);
        expect(bytes.length).toBe(144 + 16 * records);
        const d = decodeEntityStatePdu(bytes);
        expect(d.protocolVersion).toBe(version);
        expect(d.exercise).toBe(9);
        expect(d.timestamp).toBe(0x8000_0001);
        expect(d.length).toBe(144 + 16 * records);
        expect(d.status).toBe(version === 7 ? 5 : undefined);
        expect(d.entityId).toEqual({ site: 301, application: 4002, entity: 65535 });
        expect(d.forceId).toBe(2);
        expect(d.variableParameterCount).toBe(records);
        expect(d.entityType).toEqual({ kind: 1, domain: 3, country: 225, category: 61, subcategory: 2, specific: 3, extra: 4 });
        expect(d.alternativeEntityType).toEqual({ kind: 1, domain: 3, country: 1, category: 2, subcategory: 3, specific: 4, extra: 5 });
        expect(d.velocity).toEqual([f32(1.25), f32(-2.5), f32(0.1)]);
        expect(d.location).toEqual(LOCATION); // float64 exactly
        expect(d.orientation).toEqual({ psi: f32(0.5), theta: f32(-0.25), phi: f32(3.0) });
        expect(d.appearance).toBe(0x00010002);
        expect(d.deadReckoning).toEqual({ algorithm: 4, acceleration: [f32(0.5), f32(0.25), f32(-9.75)], angularVelocity: [f32(0.01), f32(0.02), f32(0.03)] });
        expect(d.marking).toEqual({ characterSet: 1, text: 'PLB-7' });
        expect(d.capabilities).toBe(0xdeadbeef);
      });
    }

    it('open-dis reads a hand-built PDU with the same field values the decoder reads', () => {
      const bytes = handBuiltPdu({ version, exercise: 3, timestamp: 123456789, status: 2, site: 11, application: 22, entity: 33, force: 1, variableRecords: 1, location: LOCATION, velocity: [3, 4, 5], marking: 'HAND' });
      const theirs = new dis.PduFactory().createPdu(bytes.slice().buffer) as Record<string, unknown> & { entityLocation: { x: number; y: number; z: number }; entityID: Record<string, number>; entityLinearVelocity: Record<string, number> };
      const ours = decodeEntityStatePdu(bytes);
      expect([theirs.entityLocation.x, theirs.entityLocation.y, theirs.entityLocation.z]).toEqual([...ours.location]);
      expect(Object.values(theirs.entityID)).toEqual([ours.entityId.site, ours.entityId.application, ours.entityId.entity]);
      expect([theirs.entityLinearVelocity.x, theirs.entityLinearVelocity.y, theirs.entityLinearVelocity.z]).toEqual([...ours.velocity]);
      expect(theirs.timestamp).toBe(ours.timestamp);
      expect(theirs.exerciseID).toBe(3);
      expect(version === 6 ? theirs.pduLength : theirs.length).toBe(160);
    });
  });
}

describe('hand-built PDUs from the field table (IEEE 1278.1 §7.2.2 layout)', () => {
  it('reads each field at its offset', () => {
    const bytes = handBuiltPdu({ version: 7, exercise: 200, timestamp: 0xfffffffe, status: 0x80, site: 0xabcd, application: 1, entity: 2, force: 3, location: [-1.5, 2.25, 6356752.314245], orientation: [1, 2, 3], appearance: 0xffffffff, capabilities: 1, marking: 'ABCDEFGHIJK' });
    expect(bytes[0]).toBe(7);
    const d = decodeEntityStatePdu(bytes);
    expect(d.exercise).toBe(200);
    expect(d.timestamp).toBe(0xfffffffe);
    expect(d.status).toBe(0x80);
    expect(d.entityId.site).toBe(0xabcd);
    expect(d.forceId).toBe(3);
    expect(d.location).toEqual([-1.5, 2.25, 6356752.314245]);
    expect(d.orientation).toEqual({ psi: 1, theta: 2, phi: 3 });
    expect(d.appearance).toBe(0xffffffff);
    expect(d.marking.text).toBe('ABCDEFGHIJK'); // all 11 characters, no terminator
    expect(d.capabilities).toBe(1);
  });

  it('version 6 has no status byte', () => {
    expect(decodeEntityStatePdu(handBuiltPdu({ version: 6, status: 9, location: [1, 2, 3] })).status).toBeUndefined();
  });

  it('reads a PDU at an offset of a larger buffer (a view into a datagram)', () => {
    const pdu = handBuiltPdu({ version: 6, site: 5, location: [7, 8, 9] });
    const big = new Uint8Array(300);
    big.set(pdu, 13);
    expect(decodeEntityStatePdu(big.subarray(13)).location).toEqual([7, 8, 9]);
    expect(decodeEntityStatePdu(big, 13).entityId.site).toBe(5);
  });
});

describe('errors: a stable code and the byte offset', () => {
  const ok = () => handBuiltPdu({ version: 7, location: [1, 2, 3] });
  it('short header', () => expectError(() => decodeEntityStatePdu(new Uint8Array(11)), 'PDU_SHORT_HEADER', 0));
  it('protocol version 5', () => {
    const b = ok();
    b[0] = 5;
    expectError(() => decodeEntityStatePdu(b), 'PDU_VERSION', 0);
  });
  it('another PDU type (Fire PDU, type 2)', () => {
    const b = ok();
    b[2] = 2;
    expectError(() => decodeEntityStatePdu(b), 'PDU_NOT_ENTITY_STATE', 2);
  });
  it('header length under 144', () => expectError(() => decodeEntityStatePdu(handBuiltPdu({ version: 6, location: [1, 2, 3], lengthField: 100 })), 'PDU_LENGTH_FIELD', 8));
  it('datagram shorter than the header length', () => expectError(() => decodeEntityStatePdu(ok().subarray(0, 140)), 'PDU_TRUNCATED', 140));
  it('variable-parameter count that disagrees with the length', () => {
    expectError(() => decodeEntityStatePdu(handBuiltPdu({ version: 6, location: [1, 2, 3], variableRecords: 2, lengthField: 160 })), 'PDU_VARIABLE_COUNT', 19);
  });
  it('non-finite location', () => expectError(() => decodeEntityStatePdu(handBuiltPdu({ version: 7, location: [1, Number.NaN, 3] })), 'PDU_LOCATION', 56));
});

describe('datagrams with several PDUs (bundling)', () => {
  it('walks Entity State PDUs and skips other types by their length', () => {
    const a = handBuiltPdu({ version: 7, entity: 1, location: [1, 2, 3] });
    const other = new Uint8Array(32);
    new DataView(other.buffer).setUint16(8, 32);
    other.set([7, 1, 2, 2]); // a Fire PDU header (type 2, family 2)
    const b = handBuiltPdu({ version: 7, entity: 2, location: [4, 5, 6] });
    const all = new Uint8Array(a.length + other.length + b.length);
    all.set(a, 0);
    all.set(other, a.length);
    all.set(b, a.length + other.length);
    const items = splitDatagram(all);
    expect(items.map((i) => i.kind)).toEqual(['entity-state', 'other', 'entity-state']);
    expect(items[2].kind === 'entity-state' && items[2].pdu.entityId.entity).toBe(2);
  });
  it('a truncated second PDU gives the first and an error at the end', () => {
    const a = handBuiltPdu({ version: 6, location: [1, 2, 3] });
    const all = new Uint8Array(a.length + 50);
    all.set(a);
    all.set(a.subarray(0, 50), a.length);
    const items = splitDatagram(all);
    expect(items.map((i) => i.kind)).toEqual(['entity-state', 'error']);
    expect(items[1].kind === 'error' && items[1].error.code).toBe('PDU_TRUNCATED');
  });
});

describe('fuzzing (fast-check, fixed seeds)', () => {
  propTest.prop([fc.uint8Array({ maxLength: 400 })], { seed: 1278, numRuns: 2000 })('arbitrary bytes: a PDU or a DisPduError, never another exception', (bytes) => {
    try {
      decodeEntityStatePdu(bytes);
    } catch (e) {
      expect(e).toBeInstanceOf(DisPduError);
    }
    expect(() => splitDatagram(bytes)).not.toThrow();
  });

  propTest.prop([fc.uint8Array({ minLength: 12, maxLength: 400 }).map((b) => {
    b[0] = 6 + (b[0] & 1);
    b[2] = 1;
    b[3] = 1;
    return b;
  })], { seed: 6, numRuns: 2000 })('bytes with a valid-looking header: a PDU or a DisPduError', (bytes) => {
    try {
      const d = decodeEntityStatePdu(bytes);
      expect(d.length).toBe(144 + 16 * d.variableParameterCount);
      expect(d.length).toBeLessThanOrEqual(bytes.length);
    } catch (e) {
      expect(e).toBeInstanceOf(DisPduError);
    }
  });

  propTest.prop([fc.constantFrom(6 as const, 7 as const), fc.integer({ min: 0, max: 4 }), fc.nat(), fc.double({ noNaN: true, noDefaultInfinity: true })], { seed: 7, numRuns: 300 })(
    'every truncation of a valid PDU is refused as truncated or short',
    (version, records, cutSeed, x) => {
      const full = handBuiltPdu({ version, variableRecords: records, location: [x, 0, 0] });
      expect(decodeEntityStatePdu(full).location[0]).toBe(x);
      const cut = cutSeed % full.length;
      try {
        decodeEntityStatePdu(full.subarray(0, cut));
        throw new Error('a truncated PDU was accepted');
      } catch (e) {
        expect(e).toBeInstanceOf(DisPduError);
        expect(['PDU_TRUNCATED', 'PDU_SHORT_HEADER']).toContain((e as DisPduError).code);
      }
    },
  );
});
