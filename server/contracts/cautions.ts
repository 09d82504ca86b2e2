/**
 * Safety wording shown wherever a technician wires a board: the printed setup sheet
 * (server/services/provisioning.ts) and the screen that shows a new secret. One text, so the
 * screen and the paper agree.
 */
export const MAINS_CAUTION =
  'The board’s power supply, and on some boards the relay contacts, may carry mains voltage. Isolate and lock off the supply before opening the enclosure. ' +
  'Mains wiring is work for a qualified electrician under local codes. Valve solenoids run on 24 VAC from their own transformer; never switch mains through a valve circuit.';

export const WATER_AND_GROUND_CAUTION =
  'Irrigation connected to drinking water needs an approved backflow preventer, tested as local rules require. Have buried utilities located before you dig.';
