import { expect, test, type Browser, type Page } from '@playwright/test';
import { DEMO_PROJECT, DEMO_TEAM_NAME, DEMO_USERS } from '../lib/server/demo/constants';

// Teams and access end to end, in Chromium against the production build: the demo lead invites
// a reviewer, who joins from a second browser (new account via the link) and sees the project;
// a user of another team opening the project's URL gets the not-found page.

test.use({ storageState: 'e2e/.auth/lead.json' });

const NEW_PASSWORD = 'harbour-kite-fennel-37';
const stamp = () => `${Date.now().toString(36)}${Math.floor(Math.random() * 1e4)}`;

async function createInvitationLink(page: Page, role: 'Lead' | 'Reviewer' | 'Observer', note: string): Promise<string> {
  await page.getByLabel('Role', { exact: true }).selectOption({ label: role });
  await page.getByLabel('Note (optional)').fill(note);
  await page.getByRole('button', { name: 'Create invitation link' }).click();
  const linkBox = page.getByRole('textbox', { name: 'Invitation link' });
  await expect(linkBox).toBeVisible();
  const link = await linkBox.inputValue();
  expect(link).toMatch(/\/invite\/[A-Za-z0-9_-]{43}$/);
  return link;
}

/** A fresh browser (no cookies) that opens the link and creates an account from it. */
async function joinWithNewAccount(browser: Browser, link: string, teamName: string, name: string, email: string) {
  const context = await browser.newContext({ storageState: { cookies: [], origins: [] } });
  const page = await context.newPage();
  await page.goto(link);
  await expect(page.getByRole('heading', { level: 1, name: `Join ${teamName}` })).toBeVisible();
  await page.getByLabel('Your name').fill(name);
  await page.getByLabel('Email address').fill(email);
  await page.getByLabel('Password', { exact: true }).fill(NEW_PASSWORD);
  await page.getByRole('button', { name: `Create account and join ${teamName}` }).click();
  await expect(page).toHaveURL(/\/$/);
  await expect(page.getByRole('heading', { level: 1, name: 'Projects' })).toBeVisible();
  return { context, page };
}

test('the lead invites a reviewer, who joins from a second browser and sees the project', async ({ page, browser }) => {
  await page.goto('/team');
  await expect(page.getByRole('heading', { level: 1, name: `Team: ${DEMO_TEAM_NAME}` })).toBeVisible();
  const link = await createInvitationLink(page, 'Reviewer', 'New reviewer (e2e)');

  const email = `reviewer-${stamp()}@example.org`;
  const reviewer = await joinWithNewAccount(browser, link, DEMO_TEAM_NAME, 'Mira Quayle', email);
  const project = reviewer.page.getByRole('link', { name: DEMO_PROJECT.name });
  await expect(project).toBeVisible();
  await project.click();
  await expect(reviewer.page.getByRole('heading', { level: 1, name: DEMO_PROJECT.name })).toBeVisible();
  await expect(reviewer.page.getByText(/Your role in this team: reviewer/)).toBeVisible();

  // The lead sees the new member with the reviewer role; the link is no longer pending.
  await page.reload();
  const row = page.getByTestId(`member-${email}`);
  await expect(row).toBeVisible();
  await expect(row.getByLabel('Role of Mira Quayle')).toHaveValue('reviewer');
  await expect(page.getByRole('cell', { name: 'New reviewer (e2e)' })).toHaveCount(0);

  // The link works once: a third browser is refused with a clear message.
  const third = await browser.newContext({ storageState: { cookies: [], origins: [] } });
  const thirdPage = await third.newPage();
  await thirdPage.goto(link);
  await expect(thirdPage.getByRole('heading', { level: 1, name: 'This invitation cannot be used' })).toBeVisible();
  await expect(thirdPage.getByText(/already been used/)).toBeVisible();
  await third.close();
  await reviewer.context.close();
});

test('a user of another team opening the project URL sees the not-found page', async ({ page, browser }) => {
  // The project's address, from the lead's list.
  await page.goto('/');
  const href = await page.getByRole('link', { name: DEMO_PROJECT.name }).getAttribute('href');
  expect(href).toMatch(/^\/projects\/[A-Za-z0-9_-]+$/);

  // The lead starts a second team and invites an outsider into it (only into it).
  const otherTeam = `Estuary Night Shift ${stamp()}`;
  await page.goto('/team');
  await page.getByLabel('New team name').fill(otherTeam);
  await page.getByRole('button', { name: 'Create team' }).click();
  await expect(page.getByRole('heading', { level: 1, name: `Team: ${otherTeam}` })).toBeVisible();
  const link = await createInvitationLink(page, 'Lead', 'Outsider (e2e)');
  const outsider = await joinWithNewAccount(browser, link, otherTeam, 'Olek Strand', `outsider-${stamp()}@example.org`);
  await expect(outsider.page.getByRole('link', { name: DEMO_PROJECT.name })).toHaveCount(0);

  const response = await outsider.page.goto(href ?? '/');
  expect(response?.status()).toBe(404);
  await expect(outsider.page.getByRole('heading', { level: 1, name: 'Not found' })).toBeVisible();
  await expect(outsider.page.getByText(DEMO_PROJECT.name)).toHaveCount(0);
  await outsider.context.close();

  // A signed-out visitor is sent to sign in instead.
  const anon = await browser.newContext({ storageState: { cookies: [], origins: [] } });
  const anonPage = await anon.newPage();
  await anonPage.goto(href ?? '/');
  await expect(anonPage).toHaveURL(/\/signin\?callbackUrl=/);
  await anon.close();

  // Leave the lead working in the demo team again.
  await page.goto('/team');
  await page.getByRole('button', { name: `Switch to ${DEMO_TEAM_NAME}` }).click();
  await expect(page.getByRole('heading', { level: 1, name: `Team: ${DEMO_TEAM_NAME}` })).toBeVisible();
});

test('a wrong password gets a clear message and no session', async ({ browser }) => {
  const reviewer = DEMO_USERS.find((u) => u.role === 'reviewer');
  if (!reviewer) throw new Error('the demo seed has no reviewer');
  const context = await browser.newContext({ storageState: { cookies: [], origins: [] } });
  const page = await context.newPage();
  await page.goto('/signin');
  await page.getByLabel('Email address').fill(reviewer.email);
  await page.getByLabel('Password', { exact: true }).fill('not-the-password-at-all');
  await page.getByRole('button', { name: 'Sign in' }).click();
  await expect(page.getByText('That email and password do not match an account. Check both and try again.')).toBeVisible();
  await page.goto('/');
  await expect(page).toHaveURL(/\/signin/);
  await context.close();
});

test('a tampered session cookie is treated as signed out', async ({ browser }) => {
  const context = await browser.newContext({ storageState: 'e2e/.auth/lead.json' });
  const cookies = await context.cookies();
  const session = cookies.find((c) => c.name.endsWith('next-auth.session-token'));
  expect(session).toBeDefined();
  if (!session) return;
  const v = session.value;
  const mid = Math.floor(v.length / 2);
  await context.addCookies([{ ...session, value: v.slice(0, mid) + (v[mid] === 'x' ? 'y' : 'x') + v.slice(mid + 1) }]);
  const page = await context.newPage();
  await page.goto('/team');
  await expect(page).toHaveURL(/\/signin/);
  await expect(page.getByText(/Error|stack/i)).toHaveCount(0);
  await context.close();
});

test('signing out ends the session', async ({ browser }) => {
  const reviewer = DEMO_USERS.filter((u) => u.role === 'reviewer')[1];
  if (!reviewer) throw new Error('the demo seed has fewer than two reviewers');
  const context = await browser.newContext({ storageState: { cookies: [], origins: [] } });
  const page = await context.newPage();
  await page.goto('/signin');
  await page.getByLabel('Email address').fill(reviewer.email);
  await page.getByLabel('Password', { exact: true }).fill(reviewer.password);
  await page.getByRole('button', { name: 'Sign in' }).click();
  await expect(page.getByRole('heading', { level: 1, name: 'Projects' })).toBeVisible();
  await page.goto('/team');
  // A reviewer sees the team read-only.
  await expect(page.getByRole('button', { name: 'Create invitation link' })).toHaveCount(0);
  await page.getByRole('button', { name: 'Sign out' }).click();
  await expect(page).toHaveURL(/\/signin/);
  expect((await context.cookies()).some((c) => c.name.endsWith('next-auth.session-token'))).toBe(false);
  await page.goto('/team');
  await expect(page).toHaveURL(/\/signin\?callbackUrl=%2Fteam/);
  await context.close();
});
