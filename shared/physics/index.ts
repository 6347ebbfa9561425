export * from './fall';
export * from './surfaces';
export * from './impact';
