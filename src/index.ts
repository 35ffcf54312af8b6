// The public API of kinhue. Re-exports only.
export * from './errors.js';
export { VERSION } from './version.js';
