export * from './decode';
export * from './resample';
export * from './preprocess';
export * from './colormap';
export * from './normalize';
export * from './overlay';
