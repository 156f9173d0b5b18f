/**
 * The JSON Schema validator (ajv, draft 2020-12), loaded when a plan or run file is first checked: loading
 * and compiling it is among the largest costs of starting hhat, and most commands never need it.
 */
import { createRequire } from 'node:module';
import type { Ajv2020 as Ajv, Options } from 'ajv/dist/2020.js';

const require = createRequire(import.meta.url);

export function loadAjv(options: Options): Ajv {
  const { Ajv2020 } = require('ajv/dist/2020.js') as { Ajv2020: new (options: Options) => Ajv };
  return new Ajv2020(options);
}
