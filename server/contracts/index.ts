export * from './common';
export * from './auth';
export * from './sites';
export * from './controllers';
export * from './zones';
