// The project's seeded generator (src/random.ts), under the name the tests use.
export { seededUniform as random } from '../../src/random.js';
