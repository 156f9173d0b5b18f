import type { Command } from 'commander';
import { COMMANDS } from './summaries.js';
import { UsageError } from '../core/errors.js';
import { parseIntegerOption } from '../core/options.js';
import { formatValue } from '../core/format.js';
import { parseNumber } from '../core/spec.js';
import { convertEntropy, unitFactor, KNOWN_UNITS } from '../core/units.js';

export function registerConvertCommand(program: Command, print: (text: string) => void): void {
  program
    .command('convert')
    .description(COMMANDS.convert)
    .argument('<value>', 'the entropy in nats (or bits with --bits)')
    .option('--from <unit>', `the unit the data were in (${KNOWN_UNITS.join(', ')})`)
    .option('--to <unit>', 'the unit to express it in')
    .option('--factor <c>', 'instead of units: the data are multiplied by c')
    .option('--dim <d>', 'the dimension of the data', '1')
    .option('--bits', 'the value is in bits (and so is the answer)')
    .action((valueText: string, options: { from?: string; to?: string; factor?: string; dim: string; bits?: boolean }) => {
      const value = parseNumber(valueText);
      if (value === undefined) throw new UsageError(`${valueText} is not a number; give the entropy value to convert`);
      if (!Number.isFinite(value)) throw new UsageError(`${valueText} is beyond the range of a double (about ±1.8e308); give the entropy value to convert`);
      const dim = parseIntegerOption('--dim', options.dim, 1);
      let factor: number;
      if (options.factor !== undefined) {
        if (options.from || options.to) throw new UsageError('give either --factor or --from and --to, not both');
        const c = parseNumber(options.factor);
        if (c === undefined) throw new UsageError(`--factor ${options.factor} is not a number`);
        if (!Number.isFinite(c)) throw new UsageError(`--factor ${options.factor} is beyond the range of a double (about ±1.8e308)`);
        // A nonzero digit before the exponent that still reads as 0: the value underflowed.
        if (c === 0 && /[1-9]/.test(options.factor.split(/e/i)[0]))
          throw new UsageError(`--factor ${options.factor} is below the smallest double (about 5e-324) and reads as 0; it must be a finite nonzero number`);
        factor = c;
      } else {
        if (!options.from || !options.to) throw new UsageError('give --from and --to units (e.g. --from mm --to m), or --factor c');
        factor = unitFactor(options.from, options.to);
      }
      const scale = options.bits ? Math.LN2 : 1;
      const converted = convertEntropy(value * scale, dim, factor) / scale;
      // The shift d·log|c| itself, not converted − value: beside a value near 1e20 that difference rounds to 0.
      const shift = convertEntropy(0, dim, factor) / scale;
      const unit = options.bits ? 'bits' : 'nats';
      const what = options.factor !== undefined ? `data × ${options.factor}` : `${options.from} → ${options.to}`;
      print(`${formatValue(converted, 10)} ${unit}  (${what}, d = ${dim}: ${value} ${shift >= 0 ? '+' : '−'} ${formatValue(Math.abs(shift), 10)})`);
    });
}
