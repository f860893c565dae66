/**
 * The npm `open-dis` package (1.3.6) as an independent encoder/decoder. Its dis6 and dis7 builds
 * both assign one global `dis`, so each is loaded into its own `vm` context.
 */
import { readFileSync } from 'node:fs';
import { createRequire } from 'node:module';
import { createContext, runInContext } from 'node:vm';

const require = createRequire(import.meta.url);

/** The parts of open-dis the tests use (it ships no types). */
export interface OpenDisRecord { [field: string]: unknown }
export interface OpenDis {
  EntityStatePdu: new () => OpenDisRecord;
  OutputStream: new (buffer: ArrayBuffer) => { toByteArray(): ArrayBuffer } & OpenDisRecord;
  InputStream: new (buffer: ArrayBuffer) => OpenDisRecord;
  PduFactory: new () => { createPdu(data: ArrayBuffer): OpenDisRecord };
  ArticulationParameter?: new () => OpenDisRecord;
  VariableParameter?: new () => OpenDisRecord;
}

export function loadOpenDis(version: 6 | 7): OpenDis {
  const file = require.resolve(`open-dis/dist/dis${version}.min.js`);
  const context = createContext({ require, console });
  runInContext(readFileSync(file, 'utf8'), context, { filename: file });
  return (context as { dis: OpenDis }).dis;
}

/** Encode an open-dis PDU object to bytes with its own encoder. */
export function encodeWith(dis: OpenDis, pdu: OpenDisRecord): Uint8Array {
  const out = new dis.OutputStream(new ArrayBuffer(2048));
  (pdu.encodeToBinary as (o: unknown) => void).call(pdu, out);
  return new Uint8Array(out.toByteArray());
}
