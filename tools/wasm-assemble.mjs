/** WebAssembly text to bytes with wabt (a dev dependency), for the generators in tools/. */
import wabtInit from 'wabt';

/** The assembled module of `text` (SIMD and saturating conversions enabled), validated. */
export async function assemble(name, text) {
  const wabt = await wabtInit();
  const module = wabt.parseWat(name, text, { simd: true, sat_float_to_int: true });
  module.validate();
  const { buffer } = module.toBinary({});
  module.destroy();
  return Buffer.from(buffer);
}
