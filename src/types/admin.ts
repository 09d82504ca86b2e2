/** Shapes of the firm-running screens (people, tokens, webhooks, audit); defined with their contracts. */
export type { UserStatus, UserView, AuditEntryView } from '../../server/contracts/users';
export type { ApiTokenView } from '../../server/contracts/tokens';
export type { WebhookDeliveryView, WebhookEvent, WebhookView } from '../../server/contracts/webhooks';

export type AuditPage<T> = { items: T[]; page: number; pageSize: number; total: number };
