import type { Role } from '../../types/api';

export const roleLabels: Record<Role, string> = {
  admin: 'Admin',
  manager: 'Manager',
  technician: 'Technician',
  owner: 'Property owner',
};
