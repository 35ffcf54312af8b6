// Batch restore: discovery, output naming, the manifest, the worker queue, per-file restore, and the
// in-memory colourisation shared with scoring. Re-exports only.
export * from './options.js';
export * from './discovery.js';
export * from './naming.js';
export * from './manifest.js';
export * from './part.js';
export * from './run-folder.js';
export * from './run-progress.js';
export {
  colouriseLightness, fullSizeGrid, workingColour, workingSize,
  type ColouriseOptions, type RefineStep, type WorkingColour,
} from './colourise.js';
export * from './restore-file.js';
export * from './restore.js';
export { readModelInfo, type ModelInfo } from './model-info.js';
