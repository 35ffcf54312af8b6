// File safety: where a path really leads, refusing outputs that would replace inputs, file names that
// fit the file system (temporary names with their owner, stale ones removed), atomic writes, and finding the images a command reads. Re-exports only.
export * from './identity.js';
export * from './output-guard.js';
export * from './temp-name.js';
export * from './folder-walk.js';
export * from './discovery.js';
export * from './atomic.js';
