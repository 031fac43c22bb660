/**
 * The people of the demo scenario, as the local identity provider knows them.
 *
 * The identity provider signs in any e-mail address; these are only the ones its
 * sign-in page offers as one-click buttons. The database seed reuses the names so the
 * app and the identity provider agree on who is who. Organisations and roles are the
 * app's business (its database decides them); the descriptions here only help a person
 * choose whom to sign in as.
 *
 * All names are invented.
 */
export interface DemoUser {
  email: string;
  name: string;
  description: string;
}

export const demoUsers: readonly DemoUser[] = [
  {
    email: "admin@owner.example",
    name: "Ingrid Kowalczyk",
    description: "Administrator at the asset owner: members, contracts and API clients.",
  },
  {
    email: "engineer@owner.example",
    name: "Rafael Oduya",
    description: "Integrity engineer at the asset owner: reviews and decides on submissions.",
  },
  {
    email: "manager@owner.example",
    name: "Margit Sandoval",
    description: "Plant manager at the asset owner: reads results across the plant.",
  },
  {
    email: "tech@monitoring.example",
    name: "Duncan Achterberg",
    description: "Technician at the corrosion-monitoring contractor: records coupon data.",
  },
  {
    email: "tech@inspection.example",
    name: "Noor Valdivia",
    description: "Technician at the inspection contractor: records wall-thickness readings.",
  },
  {
    email: "engineer@owner2.example",
    name: "Tobias Mwangi-Lund",
    description: "Integrity engineer at a second, unrelated asset owner.",
  },
  {
    email: "unverified@owner.example",
    name: "Elsa Brightwater",
    description: "Invited to the asset owner; the identity provider reports the e-mail as unverified.",
  },
];

/** Addresses the identity provider reports with `email_verified: false`. */
export const unverifiedEmails: ReadonlySet<string> = new Set(["unverified@owner.example"]);
