// The public API of kinhue. Re-exports only.
export * from './errors.js';
export * from './files/index.js';
export { VERSION } from './version.js';
export * from './colour/index.js';
export * from './model/index.js';
export * from './image/index.js';
export * from './training/index.js';
export * from './batch/index.js';
export * from './hints/index.js';
export * from './report/index.js';
