// Used only when hhat runs from its TypeScript sources (tests, tsx): registers the TypeScript loader in the
// worker thread, then loads the real worker. The published package runs dist/src/harness/worker.js directly.
import { register } from 'tsx/esm/api';

register();
await import('./worker.ts');
