export * from './enums';
export * from './sites';
export * from './users';
export * from './devices';
export * from './audit';
export * from './telemetry';
export * from './weather';
export * from './programs';
