/**
 * The wiring caution, in the same words as the printed setup sheet
 * (server/services/provisioning.ts, setupSheetHtml), so the screen and the paper agree.
 */
export const MAINS_CAUTION =
  'The board’s power supply, and on some boards the relay contacts, may carry mains voltage. Isolate and lock off the supply before opening the enclosure. ' +
  'Mains wiring is work for a qualified electrician under local codes. Valve solenoids run on 24 VAC from their own transformer; never switch mains through a valve circuit.';
