/**
 * Entity State PDUs written byte by byte from the field table of IEEE 1278.1 §7.2.2 (offsets as
 * listed in ingest/dis/pdu.ts, computed from the record sizes), independent of the decoder.
 */
export interface HandPdu {
  version: 6 | 7;
  exercise?: number;
  timestamp?: number;
  status?: number;
  site?: number;
  application?: number;
  entity?: number;
  force?: number;
  variableRecords?: number;
  entityType?: [number, number, number, number, number, number, number];
  velocity?: [number, number, number];
  location: [number, number, number];
  orientation?: [number, number, number];
  appearance?: number;
  drAlgorithm?: number;
  acceleration?: [number, number, number];
  angularVelocity?: [number, number, number];
  marking?: string;
  capabilities?: number;
  /** Override the header length field (default 144 + 16·N). */
  lengthField?: number;
}

export function handBuiltPdu(p: HandPdu): Uint8Array {
  const n = p.variableRecords ?? 0;
  const size = 144 + 16 * n;
  const bytes = new Uint8Array(size);
  const dv = new DataView(bytes.buffer);
  dv.setUint8(0, p.version);
  dv.setUint8(1, p.exercise ?? 1);
  dv.setUint8(2, 1); // PDU type: Entity State
  dv.setUint8(3, 1); // protocol family: entity information
  dv.setUint32(4, p.timestamp ?? 0);
  dv.setUint16(8, p.lengthField ?? size);
  if (p.version === 7) dv.setUint8(10, p.status ?? 0);
  dv.setUint16(12, p.site ?? 0);
  dv.setUint16(14, p.application ?? 0);
  dv.setUint16(16, p.entity ?? 0);
  dv.setUint8(18, p.force ?? 0);
  dv.setUint8(19, n);
  const t = p.entityType ?? [1, 3, 225, 5, 1, 0, 0];
  dv.setUint8(20, t[0]);
  dv.setUint8(21, t[1]);
  dv.setUint16(22, t[2]);
  for (let i = 3; i < 7; i++) dv.setUint8(21 + i, t[i]);
  const v = p.velocity ?? [0, 0, 0];
  v.forEach((x, i) => dv.setFloat32(36 + 4 * i, x));
  p.location.forEach((x, i) => dv.setFloat64(48 + 8 * i, x));
  (p.orientation ?? [0, 0, 0]).forEach((x, i) => dv.setFloat32(72 + 4 * i, x));
  dv.setUint32(84, p.appearance ?? 0);
  dv.setUint8(88, p.drAlgorithm ?? 2);
  (p.acceleration ?? [0, 0, 0]).forEach((x, i) => dv.setFloat32(104 + 4 * i, x));
  (p.angularVelocity ?? [0, 0, 0]).forEach((x, i) => dv.setFloat32(116 + 4 * i, x));
  dv.setUint8(128, 1); // character set: ASCII
  const m = p.marking ?? '';
  for (let i = 0; i < Math.min(11, m.length); i++) dv.setUint8(129 + i, m.charCodeAt(i));
  dv.setUint32(140, p.capabilities ?? 0);
  for (let r = 0; r < n; r++) dv.setUint8(144 + 16 * r, 0); // record type 0: articulated part
  return bytes;
}
