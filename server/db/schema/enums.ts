import { pgEnum } from 'drizzle-orm/pg-core';

export const roleEnum = pgEnum('role', ['admin', 'manager', 'technician', 'owner']);
export const unitSystemEnum = pgEnum('unit_system', ['metric', 'us']);
export const plantTypeEnum = pgEnum('plant_type', [
  'cool_season_turf',
  'warm_season_turf',
  'shrubs',
  'trees',
  'groundcover',
  'vegetables',
]);
export const soilTextureEnum = pgEnum('soil_texture', [
  'sand',
  'loamy_sand',
  'sandy_loam',
  'loam',
  'silt_loam',
  'clay_loam',
  'clay',
]);
export const headTypeEnum = pgEnum('head_type', ['spray', 'rotor', 'drip', 'bubbler']);
