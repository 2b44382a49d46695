// The demo team, its users and project (DESIGN.md §7). The passwords are public on purpose: they
// are printed by `npm run db:seed` and shown in the README's quick start, for the demo only.

export const DEMO_TEAM_NAME = 'Harbor Lane Support';

export const DEMO_PROJECT = {
  name: 'Customer messages',
  description:
    'Inbound support messages labelled by topic. Embeddings are synthetic (64 dimensions); 5 % of the labels were planted wrong near the class boundaries for the demo.',
} as const;

export type DemoUser = { email: string; name: string; role: 'lead' | 'reviewer'; password: string };

export const DEMO_USERS: readonly DemoUser[] = [
  { email: 'lead@harbor-lane.example', name: 'Ines Okafor', role: 'lead', password: 'quay-lantern-mosaic-81' },
  { email: 'reviewer1@harbor-lane.example', name: 'Tomas Lindqvist', role: 'reviewer', password: 'gull-ledger-tinsel-27' },
  { email: 'reviewer2@harbor-lane.example', name: 'Priya Raman', role: 'reviewer', password: 'brine-compass-orchid-64' },
];
