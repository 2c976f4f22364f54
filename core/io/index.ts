export * from './fs-errors';
export * from './atomic';
export * from './hash';
export * from './npy';
export * from './naming';
export * from './record';
export * from './sidecar';
export * from './labels';
