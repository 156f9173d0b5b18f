/**
 * The header of a NumPy `.npy` file (format version 1.0, as described in NumPy's `numpy.lib.format` module):
 * magic `\x93NUMPY`, version bytes 1 and 0, a 2-byte little-endian header length, then a Python dict literal
 * padded with spaces to a newline so that the data starts on a multiple of 64 bytes. The data that follows is
 * float64, little-endian, C order: a Float64Array's own bytes on every platform Node runs on.
 *
 *   writeSync(fd, npyFloat64Header([n, dim])); writeSync(fd, new Uint8Array(data.buffer, data.byteOffset, data.byteLength));
 */
export function npyFloat64Header(shape: readonly number[]): Uint8Array {
  const shapeText = shape.length === 1 ? `(${shape[0]},)` : `(${shape.join(', ')})`;
  const dict = `{'descr': '<f8', 'fortran_order': False, 'shape': ${shapeText}, }`;
  const unpadded = 10 + dict.length + 1;
  const total = Math.ceil(unpadded / 64) * 64;
  const header = new Uint8Array(total);
  header.set([0x93, 0x4e, 0x55, 0x4d, 0x50, 0x59, 1, 0]);
  new DataView(header.buffer).setUint16(8, total - 10, true);
  const text = `${dict}${' '.repeat(total - unpadded)}\n`;
  for (let i = 0; i < text.length; i++) header[10 + i] = text.charCodeAt(i);
  return header;
}

/** A float64 array's bytes, without copying. */
export function float64Bytes(data: Float64Array): Uint8Array {
  return new Uint8Array(data.buffer, data.byteOffset, data.byteLength);
}
