import type { UserStatus } from '../../types/admin';

/** How each account state reads in the People table. */
export const statusLooks: Record<UserStatus, { word: string; icon: string; color: string; text: string }> = {
  active: { word: 'Active', icon: 'check_circle', color: 'green-2', text: 'green-10' },
  invited: { word: 'Invited', icon: 'mail', color: 'blue-2', text: 'blue-10' },
  invite_expired: { word: 'Invitation expired', icon: 'schedule', color: 'amber-3', text: 'grey-10' },
  disabled: { word: 'Disabled', icon: 'block', color: 'grey-4', text: 'grey-10' },
};

/** Technicians and owners see only the sites chosen for them. */
export const needsSites = (role: string) => role === 'technician' || role === 'owner';
