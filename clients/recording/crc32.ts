/**
 * CRC-32 as used by ISO-HDLC, Ethernet, zip and PNG (the catalogue's "CRC-32/ISO-HDLC"):
 * polynomial 0x04C11DB7 processed bit-reflected (0xEDB88320), initial value and final XOR
 * 0xFFFFFFFF. Table-driven, one byte per step.
 */
const TABLE = (() => {
  const table = new Uint32Array(256);
  for (let n = 0; n < 256; n++) {
    let c = n;
    for (let k = 0; k < 8; k++) c = c & 1 ? 0xedb88320 ^ (c >>> 1) : c >>> 1;
    table[n] = c >>> 0;
  }
  return table;
})();

/** Continues a running CRC over `bytes` (start with crc = 0). */
export function crc32(bytes: Uint8Array, crc = 0): number {
  let c = (crc ^ 0xffffffff) >>> 0;
  for (let i = 0; i < bytes.length; i++) c = TABLE[(c ^ bytes[i]!) & 0xff]! ^ (c >>> 8);
  return (c ^ 0xffffffff) >>> 0;
}
