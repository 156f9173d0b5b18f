/**
 * Command lines as a user would type them again: each argument quoted for a POSIX shell only when it needs it,
 * so a printed command can be copied and run as it stands.
 */

import { realpathSync } from 'node:fs';
import { delimiter, join } from 'node:path';

/** One argument, single-quoted when it holds anything but letters, digits and `_ / . , : = @ % + -`. */
export function shellQuote(arg: string): string {
  if (arg !== '' && /^[A-Za-z0-9_/.,:=@%+-]+$/.test(arg)) return arg;
  return `'${arg.replace(/'/g, `'\\''`)}'`;
}

/** `hhat` and its arguments, quoted, on one line, called the way this process was (see invokedAs). */
export function hhatCommand(args: readonly string[]): string {
  return [invokedAs(), ...args.map(shellQuote)].join(' ');
}

/**
 * How to call hhat again the way this process was called: `npx hhat` under npm's launcher, `node PATH/bin/hhat.js`
 * when the script was run by path and the shell's `hhat` is not that script, else `hhat`.
 */
export function invokedAs(env: NodeJS.ProcessEnv = process.env, script = process.argv[1] ?? ''): string {
  if (env.npm_command === 'exec') return 'npx hhat';
  if (!/[/\\]bin[/\\]hhat\.js$/.test(script)) return 'hhat';
  const real = (p: string) => {
    try {
      return realpathSync(p);
    } catch {
      return null;
    }
  };
  const self = real(script);
  const onPath = (env.PATH ?? '').split(delimiter).some((dir) => dir && real(join(dir, 'hhat')) === self);
  return onPath ? 'hhat' : `node ${shellQuote(script)}`;
}

/** Whether the arguments give an option, as `--name value` or `--name=value`. */
export function hasOption(args: readonly string[], name: string): boolean {
  return args.some((a) => a === name || a.startsWith(`${name}=`));
}
