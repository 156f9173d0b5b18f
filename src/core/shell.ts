/**
 * Command lines as a user would type them again: each argument quoted for a POSIX shell only when it needs it,
 * so a printed command can be copied and run as it stands.
 */

/** One argument, single-quoted when it holds anything but letters, digits and `_ / . , : = @ % + -`. */
export function shellQuote(arg: string): string {
  if (arg !== '' && /^[A-Za-z0-9_/.,:=@%+-]+$/.test(arg)) return arg;
  return `'${arg.replace(/'/g, `'\\''`)}'`;
}

/** `hhat` and its arguments, quoted, on one line. */
export function hhatCommand(args: readonly string[]): string {
  return ['hhat', ...args.map(shellQuote)].join(' ');
}

/** Whether the arguments give an option, as `--name value` or `--name=value`. */
export function hasOption(args: readonly string[], name: string): boolean {
  return args.some((a) => a === name || a.startsWith(`${name}=`));
}
