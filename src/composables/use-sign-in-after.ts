import { useRouter } from 'vue-router';
import { useSessionStore } from '../stores/session';

/**
 * After a password was set from a link: sign in with it and open the app. Should that fail
 * (the sign-in limit, say), the sign-in page opens with the address filled in.
 */
export function useSignInAfter() {
  const session = useSessionStore();
  const router = useRouter();
  return async ({ email, password }: { email: string; password: string }, notice: string) => {
    try {
      await session.signIn(email, password);
      await router.replace({ name: 'fleet' });
    } catch {
      await router.replace({ name: 'sign-in', query: { email, notice } });
    }
  };
}
