// Used only when hhat runs from its TypeScript sources (tests, tsx): registers the TypeScript loader in the
// broker thread, then loads the real broker. The published package runs dist/src/harness/external/broker.js.
import { register } from 'tsx/esm/api';

register();
await import('./broker.ts');
