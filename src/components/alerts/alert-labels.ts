import type { AlertKind, AlertSeverity, AlertState } from '../../types/history';

/** Our words for alert kinds, severities and states; each severity also has its own icon. */
export const kindWords: Record<AlertKind, string> = {
  controller_offline: 'Controller out of touch',
  command_failed: 'Command not carried out',
  valve_stuck_open: 'Valve open when it should be shut',
  flow_while_closed: 'Water flowing with every valve shut',
  high_flow: 'Flow too high',
  low_flow: 'Flow too low',
  low_voltage: 'Supply voltage low',
  rain_hold: 'Rain sensor holding watering',
};

export const severityLooks: Record<AlertSeverity, { word: string; icon: string; color: string }> = {
  critical: { word: 'Critical', icon: 'report', color: 'negative' },
  warning: { word: 'Warning', icon: 'warning', color: 'warning' },
  info: { word: 'Information', icon: 'info', color: 'info' },
};

export const stateWords: Record<AlertState, string> = {
  open: 'Open',
  acknowledged: 'Acknowledged',
  resolved: 'Resolved',
};
