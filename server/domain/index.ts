/** The pure domain library: hydraulics, agronomy (FAO-56), units. No I/O. */
export * from './errors';
export * from './hydraulics';
export * from './agronomy';
export * from './units';
