import type { Command } from 'commander';
import { COMMANDS } from './summaries.js';
import type { Estimator } from '../core/contracts.js';
import { renderTable } from '../core/format.js';
import { DEQUANTIZE_FAMILIES, DEQUANTIZE_SETTING, describeSetting } from '../core/spec.js';
import { listEstimators } from '../../estimators/index.js';

export function estimatorRecord(e: Estimator) {
  return {
    id: e.id,
    family: e.family,
    quantity: e.quantity,
    summary: e.summary,
    dims: [e.dims[0], e.dims[1] === Infinity ? null : e.dims[1]],
    settings: e.settings.map((s) => ({
      name: s.name,
      default: s.default,
      allowed: describeSetting(s),
      meaning: s.meaning,
    })),
    reference: e.reference,
  };
}

function dims(e: Estimator): string {
  const [lo, hi] = e.dims;
  return hi === Infinity ? `${lo}+` : lo === hi ? String(lo) : `${lo}–${hi}`;
}

export function registerEstimatorsCommand(program: Command, print: (text: string) => void): void {
  program
    .command('estimators')
    .description(COMMANDS.estimators)
    .option('--json', 'print a JSON array instead of a table')
    .action((options: { json?: boolean }) => {
      const list = listEstimators();
      if (options.json) {
        print(JSON.stringify(list.map(estimatorRecord), null, 2));
        return;
      }
      const rows = list.map((e) => [
        e.id,
        e.family,
        dims(e),
        e.settings.length ? e.settings.map((s) => `${s.name}=${s.default}: ${describeSetting(s)}`).join('\n') : '(none)',
        e.reference,
      ]);
      print(renderTable(['estimator', 'family', 'd', 'settings (default: allowed)', 'reference'], rows, { wrap: [0, 0, 5, 52, 46] }));
      print('Use an estimator with settings as ID:key=value,... e.g. kozachenko-leonenko:k=5,norm=max');
      print('Every estimator also takes thin=t (an integer ≥ 1, default 1): it sees rows 0, t, 2t, … only, e.g. kozachenko-leonenko:thin=10');
      print(
        `The ${DEQUANTIZE_FAMILIES.slice(0, -1).join(', ')} and ${DEQUANTIZE_FAMILIES[DEQUANTIZE_FAMILIES.length - 1]} estimators also take ${DEQUANTIZE_SETTING}=none|auto|STEP (default none): uniform noise within each column's recording step (auto: detected) for data with repeated values, e.g. kozachenko-leonenko:${DEQUANTIZE_SETTING}=auto`,
      );
    });
}
