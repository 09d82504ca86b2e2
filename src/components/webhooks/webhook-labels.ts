import type { WebhookEvent } from '../../types/admin';

/** What each kind of event means to the person choosing them. */
export const eventLabels: Record<WebhookEvent, { word: string; what: string }> = {
  valve: { word: 'Valves', what: 'a valve opened or closed' },
  alert: { word: 'Alerts', what: 'an alert was raised, acknowledged or resolved' },
  controller: { word: 'Controllers', what: 'a controller went online or offline' },
  rain: { word: 'Rain', what: 'a rain input tripped or cleared' },
};

export const deliveryLooks = {
  delivered: { word: 'Delivered', color: 'green-2', text: 'green-10', icon: 'check_circle' },
  pending: { word: 'Waiting to retry', color: 'amber-3', text: 'grey-10', icon: 'schedule' },
  failed: { word: 'Failed', color: 'red-2', text: 'red-10', icon: 'error' },
} as const;
