export { runTrustChecks, regionFor, defaultTrustLayer, defaultTrustKinds, DEFAULT_TRUST_SEED } from './run';
export type { TrustInput, TrustOptions, TrustProgress } from './run';
export { readMask, boxRegion, parseBox, truthScores, DEFAULT_POINTING_TOLERANCE } from './truth';
export type { Box, Region } from './truth';
export { randomizedModel, stageWeightBlocks, prepareRandomized } from './randomize';
export type { WeightBlock } from './randomize';
export * from './report';
