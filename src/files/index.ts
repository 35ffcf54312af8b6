// File safety: where a path really leads, refusing outputs that would replace inputs, and file names
// that fit the file system (temporary names with their owner). Re-exports only.
export * from './identity.js';
export * from './output-guard.js';
export * from './temp-name.js';
export * from './folder-walk.js';
