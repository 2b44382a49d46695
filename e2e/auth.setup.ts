import { expect, test as setup } from '@playwright/test';
import { DEMO_USERS } from '../lib/server/demo/constants';

// Signs the demo lead in through the sign-in page and saves the browser state for the specs
// (playwright.config.ts runs this in its 'setup' project before the 'chromium' specs).
export const LEAD_STATE = 'e2e/.auth/lead.json';

setup('the demo lead signs in', async ({ page }) => {
  const lead = DEMO_USERS.find((u) => u.role === 'lead');
  if (!lead) throw new Error('the demo seed has no lead (lib/server/demo/constants.ts)');
  await page.goto('/signin');
  await page.getByLabel('Email address').fill(lead.email);
  await page.getByLabel('Password', { exact: true }).fill(lead.password);
  await page.getByRole('button', { name: 'Sign in' }).click();
  await expect(page).toHaveURL(/\/$/);
  await expect(page.getByRole('heading', { level: 1, name: 'Projects' })).toBeVisible();
  await page.context().storageState({ path: LEAD_STATE });
});
