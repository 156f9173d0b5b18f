// Used only when hhat runs from its TypeScript sources (tests, tsx): registers the TypeScript loader in the
// thread, then loads the real one. The published package runs dist/src/harness/module-worker.js directly.
import { register } from 'tsx/esm/api';

register();
await import('./module-worker.ts');
