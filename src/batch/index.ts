// Batch restore: its stages (plan, analyse, predict, guide, render, write), discovery, output naming, the
// manifest, the worker queue, and the in-memory colourisation shared with scoring. Re-exports only.
export * from './options.js';
export * from './naming.js';
export * from './manifest.js';
export * from './part.js';
export * from './run-folder.js';
export * from './run-progress.js';
export { colouriseLightness, workingSize, type ColouriseOptions } from './colourise.js';
export { planRestore, checkOutputs } from './stages/plan.js';
export { analyse, type Analysis } from './stages/analyse.js';
export { predictColour, type PredictSettings, type PredictedColour } from './stages/predict.js';
export { applyGuides, memoryGuide, scanGuides, NOTICEABLE_AB } from './stages/guide.js';
export * from './memory.js';
export { confidenceGrey, fullSizeGrid, render } from './stages/render.js';
export { writeResult, type ProvenanceRecord, type ResultTarget } from './stages/write.js';
export { restoreFile, type FileJob, type FileOutcome } from './stages/pipeline.js';
export * from './restore.js';
export { readModelInfo, type ModelInfo } from './model-info.js';
