/**
 * Decoder of the DIS (IEEE 1278.1) Entity State PDU: the 12-byte PDU header and the fixed
 * 144-byte part, for protocol versions 6 (IEEE 1278.1a-1998) and 7 (IEEE 1278.1-2012), read with a
 * big-endian DataView. The variable-parameter (articulation) records that follow are counted and
 * bounds-checked but not decoded: the bridge needs position and time only.
 *
 * Field table (offsets from the start of the PDU; every field big-endian):
 *
 *   0 version u8 · 1 exercise u8 · 2 PDU type u8 (1) · 3 protocol family u8 (1, entity information)
 *   4 timestamp u32 · 8 PDU length u16 (bytes, the whole PDU) · 10 v6: padding 2 B; v7: PDU status u8 + padding
 *  12 entity id: site u16, application u16, entity u16 · 18 force id u8 · 19 variable-parameter count N u8
 *  20 entity type (kind u8, domain u8, country u16, category, subcategory, specific, extra u8)
 *  28 alternative entity type (same) · 36 linear velocity 3×f32 (m/s, world frame)
 *  48 location 3×f64 (geocentric X, Y, Z in metres, WGS 84) · 72 orientation psi, theta, phi 3×f32 (rad)
 *  84 appearance u32 · 88 dead reckoning: algorithm u8, 15 B other parameters, linear acceleration
 *     3×f32, angular velocity 3×f32 · 128 marking: character set u8 + 11 B · 140 capabilities u32
 * 144 N variable-parameter records of 16 B each; so the PDU length is 144 + 16·N.
 *
 * Sources: IEEE 1278.1-2012 §7.2.2 (Entity State PDU) as laid out by the open-dis encoders
 * (open-dis/open-dis-javascript `EntityStatePdu.encodeToBinary`, dis6 and dis7), which the tests use
 * as an independent encoder; offsets computed from the record sizes.
 *
 * Several PDUs may share one datagram (PDU bundling, IEEE 1278.1-2012): `decodeEntityStatePdu` reads
 * one PDU at an offset and says how many bytes it used; `splitDatagram` walks a whole datagram.
 * Nothing here throws on arbitrary bytes except `DisPduError`, whose `code` is stable and whose
 * message says what is wrong and at which byte offset of the datagram.
 */

/** PDU type of the Entity State PDU. */
export const ENTITY_STATE_PDU_TYPE = 1;
/** Protocol family "entity information / interaction". */
export const ENTITY_INFORMATION_FAMILY = 1;
/** Length of the PDU header, bytes. */
export const PDU_HEADER_LENGTH = 12;
/** Length of the fixed part of the Entity State PDU (header included), bytes. */
export const ENTITY_STATE_FIXED_LENGTH = 144;
/** Length of one variable-parameter record, bytes. */
export const VARIABLE_PARAMETER_LENGTH = 16;
/** Protocol versions this decoder reads. */
export const SUPPORTED_VERSIONS: readonly number[] = [6, 7];

/** Stable codes of decoding errors. */
export const DIS_PDU_ERRORS = {
  PDU_SHORT_HEADER: 'fewer bytes than a PDU header (12)',
  PDU_VERSION: 'protocol version other than 6 or 7',
  PDU_NOT_ENTITY_STATE: 'a PDU of another type or family (not an Entity State PDU)',
  PDU_LENGTH_FIELD: 'the header length is shorter than the fixed part of an Entity State PDU (144)',
  PDU_TRUNCATED: 'the datagram ends before the length the header gives',
  PDU_VARIABLE_COUNT: 'the variable-parameter count does not match the header length',
  PDU_LOCATION: 'the location is not a finite geocentric position',
} as const;
export type DisPduErrorCode = keyof typeof DIS_PDU_ERRORS;

export class DisPduError extends Error {
  constructor(
    readonly code: DisPduErrorCode,
    /** Byte offset in the datagram where the problem is. */
    readonly offset: number,
    reason: string,
  ) {
    super(`byte ${offset}: ${reason}`);
    this.name = 'DisPduError';
  }
}

export interface DisEntityId {
  readonly site: number;
  readonly application: number;
  readonly entity: number;
}

export interface DisEntityType {
  readonly kind: number;
  readonly domain: number;
  readonly country: number;
  readonly category: number;
  readonly subcategory: number;
  readonly specific: number;
  readonly extra: number;
}

export interface EntityStatePdu {
  readonly protocolVersion: 6 | 7;
  readonly exercise: number;
  /** Raw DIS timestamp (see time.ts): units past the hour in bits 31..1, absolute/relative in bit 0. */
  readonly timestamp: number;
  /** PDU length from the header, bytes (144 + 16·variableParameterCount). */
  readonly length: number;
  /** PDU status byte (version 7 only; absent in version 6, where the byte is padding). */
  readonly status?: number;
  readonly entityId: DisEntityId;
  readonly forceId: number;
  readonly variableParameterCount: number;
  readonly entityType: DisEntityType;
  readonly alternativeEntityType: DisEntityType;
  /** Linear velocity, m/s, in the geocentric frame. */
  readonly velocity: readonly [number, number, number];
  /** Geocentric (ECEF, WGS 84) position, m. */
  readonly location: readonly [number, number, number];
  /** Euler angles psi, theta, phi, radians. */
  readonly orientation: { readonly psi: number; readonly theta: number; readonly phi: number };
  readonly appearance: number;
  readonly deadReckoning: {
    readonly algorithm: number;
    readonly acceleration: readonly [number, number, number];
    readonly angularVelocity: readonly [number, number, number];
  };
  readonly marking: { readonly characterSet: number; readonly text: string };
  readonly capabilities: number;
}

function entityType(dv: DataView, at: number): DisEntityType {
  return {
    kind: dv.getUint8(at),
    domain: dv.getUint8(at + 1),
    country: dv.getUint16(at + 2),
    category: dv.getUint8(at + 4),
    subcategory: dv.getUint8(at + 5),
    specific: dv.getUint8(at + 6),
    extra: dv.getUint8(at + 7),
  };
}

function vec32(dv: DataView, at: number): [number, number, number] {
  return [dv.getFloat32(at), dv.getFloat32(at + 4), dv.getFloat32(at + 8)];
}

/** Marking characters up to the first NUL; bytes outside printable ASCII become U+FFFD. */
function markingText(dv: DataView, at: number): string {
  let s = '';
  for (let i = 0; i < 11; i++) {
    const c = dv.getUint8(at + i);
    if (c === 0) break;
    s += c >= 0x20 && c < 0x7f ? String.fromCharCode(c) : '\ufffd';
  }
  return s;
}

/**
 * Read the PDU header at `offset` and return the PDU type, family and length without checking the
 * rest (used to skip PDUs of other types in a bundle).
 */
export function peekHeader(bytes: Uint8Array, offset = 0): { version: number; exercise: number; pduType: number; family: number; length: number } {
  if (bytes.length - offset < PDU_HEADER_LENGTH) {
    throw new DisPduError('PDU_SHORT_HEADER', offset, `${bytes.length - offset} bytes left, a PDU header needs ${PDU_HEADER_LENGTH}`);
  }
  const dv = new DataView(bytes.buffer, bytes.byteOffset + offset, PDU_HEADER_LENGTH);
  return { version: dv.getUint8(0), exercise: dv.getUint8(1), pduType: dv.getUint8(2), family: dv.getUint8(3), length: dv.getUint16(8) };
}

/**
 * Decode one Entity State PDU starting at `offset` of a datagram. Checks, in order: a whole header,
 * protocol version 6 or 7, PDU type 1 in family 1, header length ≥ 144, the datagram holds the
 * header length, 144 + 16·N equals the header length, and a finite location.
 * @throws DisPduError (and nothing else) when the bytes are not a well-formed Entity State PDU.
 */
export function decodeEntityStatePdu(bytes: Uint8Array, offset = 0): EntityStatePdu {
  const head = peekHeader(bytes, offset);
  if (head.version !== 6 && head.version !== 7) {
    throw new DisPduError('PDU_VERSION', offset, `protocol version ${head.version}; this decoder reads versions 6 and 7`);
  }
  if (head.pduType !== ENTITY_STATE_PDU_TYPE || head.family !== ENTITY_INFORMATION_FAMILY) {
    throw new DisPduError('PDU_NOT_ENTITY_STATE', offset + 2, `PDU type ${head.pduType} in family ${head.family}; an Entity State PDU is type 1 in family 1`);
  }
  if (head.length < ENTITY_STATE_FIXED_LENGTH) {
    throw new DisPduError('PDU_LENGTH_FIELD', offset + 8, `header length ${head.length} bytes, shorter than the ${ENTITY_STATE_FIXED_LENGTH}-byte fixed part`);
  }
  const available = bytes.length - offset;
  if (head.length > available) {
    throw new DisPduError('PDU_TRUNCATED', bytes.length, `the header gives ${head.length} bytes but the datagram has ${available} from byte ${offset}`);
  }
  const dv = new DataView(bytes.buffer, bytes.byteOffset + offset, head.length);
  const n = dv.getUint8(19);
  const expected = ENTITY_STATE_FIXED_LENGTH + VARIABLE_PARAMETER_LENGTH * n;
  if (expected !== head.length) {
    throw new DisPduError('PDU_VARIABLE_COUNT', offset + 19, `${n} variable-parameter records make ${expected} bytes, the header length is ${head.length}`);
  }
  const location: [number, number, number] = [dv.getFloat64(48), dv.getFloat64(56), dv.getFloat64(64)];
  for (let i = 0; i < 3; i++) {
    if (!Number.isFinite(location[i])) {
      throw new DisPduError('PDU_LOCATION', offset + 48 + 8 * i, `location ${'XYZ'[i]} is ${location[i]}`);
    }
  }
  const version = head.version;
  return {
    protocolVersion: version,
    exercise: head.exercise,
    timestamp: dv.getUint32(4),
    length: head.length,
    ...(version === 7 ? { status: dv.getUint8(10) } : {}),
    entityId: { site: dv.getUint16(12), application: dv.getUint16(14), entity: dv.getUint16(16) },
    forceId: dv.getUint8(18),
    variableParameterCount: n,
    entityType: entityType(dv, 20),
    alternativeEntityType: entityType(dv, 28),
    velocity: vec32(dv, 36),
    location,
    orientation: { psi: dv.getFloat32(72), theta: dv.getFloat32(76), phi: dv.getFloat32(80) },
    appearance: dv.getUint32(84),
    deadReckoning: { algorithm: dv.getUint8(88), acceleration: vec32(dv, 104), angularVelocity: vec32(dv, 116) },
    marking: { characterSet: dv.getUint8(128), text: markingText(dv, 129) },
    capabilities: dv.getUint32(140),
  };
}

/** One PDU of a datagram: an Entity State PDU, another PDU type (skipped), or an error. */
export type DatagramItem =
  | { readonly kind: 'entity-state'; readonly pdu: EntityStatePdu }
  | { readonly kind: 'other'; readonly pduType: number; readonly family: number }
  | { readonly kind: 'error'; readonly error: DisPduError };

/**
 * Walk the PDUs of one datagram (one or several bundled PDUs). A PDU of another type is skipped by
 * its header length; an error ends the walk (the rest of the datagram cannot be framed). Never throws.
 */
export function splitDatagram(bytes: Uint8Array): DatagramItem[] {
  const items: DatagramItem[] = [];
  let offset = 0;
  while (offset < bytes.length) {
    try {
      const head = peekHeader(bytes, offset);
      if ((head.version === 6 || head.version === 7) && (head.pduType !== ENTITY_STATE_PDU_TYPE || head.family !== ENTITY_INFORMATION_FAMILY)) {
        if (head.length < PDU_HEADER_LENGTH || head.length > bytes.length - offset) {
          throw new DisPduError(head.length < PDU_HEADER_LENGTH ? 'PDU_LENGTH_FIELD' : 'PDU_TRUNCATED', offset + 8, `PDU type ${head.pduType} with header length ${head.length}, ${bytes.length - offset} bytes left`);
        }
        items.push({ kind: 'other', pduType: head.pduType, family: head.family });
        offset += head.length;
        continue;
      }
      const pdu = decodeEntityStatePdu(bytes, offset);
      items.push({ kind: 'entity-state', pdu });
      offset += pdu.length;
    } catch (e) {
      if (e instanceof DisPduError) {
        items.push({ kind: 'error', error: e });
        break;
      }
      throw e;
    }
  }
  return items;
}
