/** Runs the hhat command in this process and collects what it prints, line by line, with its exit code. */
import { main } from '../../src/cli.js';

export async function runCli(args: string[]): Promise<{ code: number; out: string; err: string }> {
  let out = '';
  let err = '';
  const code = await main(args, { out: (t) => (out += `${t}\n`), err: (t) => (err += `${t}\n`) });
  return { code, out, err };
}
