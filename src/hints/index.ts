// Colour hints files, Levin et al. 2004 propagation, and reference-photo transfer. Re-exports only.
export * from './css-colour.js';
export * from './hints-file.js';
export * from './hint-colour.js';
export * from './hint-raster.js';
export * from './affinity.js';
export { MultigridSolver, type GridSystem, type SolveReport } from './multigrid.js';
export * from './propagate.js';
export * from './reference.js';
export * from './guidance.js';
export * from './skin-prior.js';
export * from './starter.js';
