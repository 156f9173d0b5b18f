#!/usr/bin/env node
let main;
try {
  ({ main } = await import('../dist/src/cli.js'));
} catch (error) {
  // A clone before its build, or a build stopped half-way: say what to run, not a module-loader trace.
  if (error?.code !== 'ERR_MODULE_NOT_FOUND' || !String(error.message).includes('/dist/')) throw error;
  process.stderr.write(
    `hhat: the program is not built (${error.message.split('\n')[0]}); run \`npm run build\` in ${new URL('..', import.meta.url).pathname}\n`,
  );
  process.exit(1);
}

// A closed pipe (hhat ... | head) is a normal way to stop reading, not an error.
// Any other failure to write there (a full disk) is one line on stderr and exit 1, not a stack trace.
process.stdout.on('error', (error) => {
  if (error.code === 'EPIPE') process.exit(0);
  const reason = error.code === 'ENOSPC' || error.code === 'EDQUOT' ? 'the disk is full' : error.message.split('\n')[0];
  process.stderr.write(`hhat: cannot write to standard output: ${reason}\n`);
  process.exit(1);
});

// Standard error carries progress and diagnostics; when it cannot be written (a full disk, a closed pipe) there
// is no one left to tell, and the run must go on to write its results.
process.stderr.on('error', () => {});

main(process.argv.slice(2)).then(
  (code) => {
    process.exitCode = code;
  },
  (err) => {
    console.error(err);
    process.exitCode = 1;
  },
);
