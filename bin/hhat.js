#!/usr/bin/env node
import { main } from '../dist/src/cli.js';

// A closed pipe (hhat ... | head) is a normal way to stop reading, not an error.
process.stdout.on('error', (error) => {
  if (error.code === 'EPIPE') process.exit(0);
  throw error;
});

main(process.argv.slice(2)).then(
  (code) => {
    process.exitCode = code;
  },
  (err) => {
    console.error(err);
    process.exitCode = 1;
  },
);
