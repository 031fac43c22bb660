import { createColumnHelper } from "@tanstack/react-table";
import { data, Form, useNavigation } from "react-router";
import { Button } from "~/components/button";
import { StatusBadge } from "~/components/badges";
import { DataTable } from "~/components/data-table";
import { FormAlert, SelectField, TextField } from "~/components/field";
import { formFailure } from "~/components/form-failure";
import { Card, EmptyState, PageHeader } from "~/components/layout";

import {
  changeMemberRole,
  engagedContractors,
  inviteMember,
  listMembers,
  resetMemberIdentity,
  setMemberAccess,
} from "~/models/users.server";
import { actorOf } from "~/models/audit.server";
import { OUTBOX_MAX_ATTEMPTS, releaseUndelivered, undeliveredMessages } from "~/models/email-outbox.server";
import { db } from "~/services/db.server";
import { redirectWithFlash } from "~/services/flash.server";
import { requireOwnerUser } from "~/services/guards.server";
import { ownerRoles, roleLabels } from "~/services/permissions";
import { formAction, intentOf, readForm } from "~/services/respond.server";
import { requestIdOf } from "~/services/problem.server";
import { formatLocal } from "~/services/time";
import type { Route } from "./+types/admin.members";

const intents = ["invite", "role", "disable", "enable", "resetIdentity", "resendEmail"] as const;
/** The forms on each person's row. */
const rowIntents = ["role", "disable", "enable", "resetIdentity"] as const;
/** The invite form's one "what they do" choice: an owner role, or `technician:<contractor id>`. */
const technicianPrefix = "technician:";

export async function loader(args: Route.LoaderArgs) {
  const user = requireOwnerUser(args, "manageMembers");
  const [members, contractors, undelivered] = await Promise.all([
    listMembers(db(), user.ownerId),
    engagedContractors(db(), user.ownerId),
    undeliveredMessages(db(), user.ownerId, OUTBOX_MAX_ATTEMPTS),
  ]);
  return {
    me: user.id,
    organisation: user.organisation.name,
    timeZone: user.timeZone,
    contractors,
    undelivered,
    members: members.map((m) => ({
      id: m.id,
      name: m.name,
      email: m.email,
      organisation: m.organisation_name,
      own: m.organisation_id === user.ownerId,
      role: m.role,
      status: m.status,
      lastSignIn: m.last_sign_in_at ? new Date(m.last_sign_in_at).toISOString() : null,
      identityBound: m.identity_bound_at ? new Date(m.identity_bound_at).toISOString() : null,
      identityRefused: m.identity_refused_at ? new Date(m.identity_refused_at).toISOString() : null,
      invitedOn: new Date(m.created_at).toISOString(),
    })),
  };
}

export async function action(args: Route.ActionArgs) {
  const user = requireOwnerUser(args, "manageMembers");
  const requestId = requestIdOf(args.context);
  const values = await readForm(args.request);
  const intent = intentOf(values, intents);
  const text = (name: string) => values[name] ?? "";

  switch (intent) {
    case "invite": {
      const access = text("access");
      const technician = access.startsWith(technicianPrefix);
      return formAction(values, async () => {
        await inviteMember(
          db(),
          user,
          {
            email: text("email"),
            name: text("name"),
            role: technician ? "contractor_technician" : access || undefined,
            contractorId: technician ? access.slice(technicianPrefix.length) : undefined,
          },
          requestId,
        );
        return redirectWithFlash("/admin/members", {
          tone: "ok",
          message: `${text("email").trim().toLowerCase()} is invited and can sign in with that address from now on; an e-mail with the sign-in link is on its way.`,
        });
      });
    }
    case "role":
      return formAction(values, async () => {
        const result = await changeMemberRole(db(), user, { userId: text("userId"), role: text("role") }, requestId);
        return redirectWithFlash("/admin/members", {
          tone: result.changed ? "ok" : "warn",
          message: result.changed
            ? `${result.member.email} is now ${roleLabels[result.member.role].toLowerCase()}.`
            : `${result.member.email} already was ${roleLabels[result.member.role].toLowerCase()}; nothing changed.`,
        });
      });
    case "disable":
    case "enable":
      return formAction(values, async () => {
        const result = await setMemberAccess(
          db(),
          user,
          { userId: text("userId"), access: intent === "disable" ? "disabled" : "enabled" },
          requestId,
        );
        const who = result.member.email;
        const message = !result.changed
          ? `Nothing changed for ${who}.`
          : intent === "disable"
            ? `${who} can no longer sign in${result.sessionsEnded > 0 ? `; ${result.sessionsEnded === 1 ? "their open session was" : `${result.sessionsEnded} open sessions were`} ended` : ""}.`
            : `${who} can sign in again.`;
        return redirectWithFlash("/admin/members", { tone: result.changed ? "ok" : "warn", message });
      });
    case "resendEmail": {
      const result = await releaseUndelivered(
        db(),
        { ownerId: user.ownerId, actor: actorOf(user), requestId },
        text("emailId"),
      );
      if (!result.released) throw data("There is no undelivered e-mail of yours with that id.", { status: 404 });
      return redirectWithFlash("/admin/members#undelivered", {
        tone: "ok",
        message: `The e-mail to ${result.toEmail} goes out again within a minute.`,
      });
    }
    case "resetIdentity":
      return formAction(values, async () => {
        const result = await resetMemberIdentity(db(), user, { userId: text("userId") }, requestId);
        const who = result.member.email;
        return redirectWithFlash("/admin/members", {
          tone: result.changed ? "ok" : "warn",
          message: result.changed
            ? `${who}’s sign-in identity is reset: their next sign-in binds the account they use then.${result.sessionsEnded > 0 ? " Their open sessions were ended." : ""}`
            : `${who} has no sign-in identity bound yet; nothing changed.`,
        });
      });
  }
}

type Member = Awaited<ReturnType<typeof loader>>["members"][number];
const col = createColumnHelper<Member>();

export default function Members({ loaderData, actionData }: Route.ComponentProps) {
  const { members, contractors, me, organisation, timeZone, undelivered } = loaderData;
  const navigation = useNavigation();
  const busy = navigation.state === "submitting";
  const inviting = busy && navigation.formData?.get("intent") === "invite";
  const invite = formFailure(actionData, { intent: "invite" });
  // A refused change on a person's row is said above the table, in the model's words.
  const row = rowIntents.map((intent) => formFailure(actionData, { intent })).find((f) => f.sent);
  const rowError = row ? Object.values(row.errors).find(Boolean) : undefined;

  const columns = [
    col.accessor((m) => `${m.name} ${m.email}`, {
      id: "person",
      header: "Person",
      cell: ({ row: { original: m } }) => (
        <div>
          <div className="font-medium text-ink">
            {m.name || "—"} {m.id === me ? <span className="text-xs font-normal text-ink-faint">(you)</span> : null}
          </div>
          <div className="text-xs text-ink-soft">{m.email}</div>
        </div>
      ),
    }),
    col.accessor("organisation", { header: "Organisation" }),
    col.accessor((m) => roleLabels[m.role], {
      id: "role",
      header: "Role",
      cell: ({ row: { original: m } }) =>
        m.own && m.id !== me && m.status !== "disabled" ? (
          <Form method="post" className="flex flex-wrap items-center gap-1.5">
            <input type="hidden" name="intent" value="role" />
            <input type="hidden" name="userId" value={m.id} />
            <label htmlFor={`role-${m.id}`} className="sr-only">
              Role of {m.email}
            </label>
            <select
              id={`role-${m.id}`}
              name="role"
              defaultValue={m.role}
              className="rounded-md border border-rule bg-white px-2 py-1 text-sm"
            >
              {ownerRoles.map((r) => (
                <option key={r} value={r}>
                  {roleLabels[r]}
                </option>
              ))}
            </select>
            <Button type="submit" variant="secondary" className="px-2.5 py-1" disabled={busy}>
              Change
            </Button>
          </Form>
        ) : (
          roleLabels[m.role]
        ),
    }),
    col.accessor("status", { header: "Access", cell: ({ getValue }) => <StatusBadge status={getValue()} /> }),
    col.accessor("lastSignIn", {
      header: `Last signed in (${timeZone})`,
      meta: { align: "right" },
      sortUndefined: "last",
      cell: ({ getValue }) => {
        const iso = getValue();
        return iso ? (
          <time dateTime={iso} className="num whitespace-nowrap">
            {formatLocal(iso, timeZone)}
          </time>
        ) : (
          "—"
        );
      },
    }),
    col.accessor((m) => (m.identityRefused ? "refused" : m.identityBound ? "bound" : "unbound"), {
      id: "identity",
      header: "Sign-in identity",
      cell: ({ row: { original: m } }) => (
        <div className="space-y-1 text-sm">
          <div className="text-ink-soft">
            {m.identityBound ? (
              <>
                Bound <time dateTime={m.identityBound}>{formatLocal(m.identityBound, timeZone)}</time>
              </>
            ) : (
              "Not bound yet: the next sign-in binds it"
            )}
          </div>
          {m.identityRefused ? (
            <p className="font-medium text-bad" role="status">
              Sign-in with another identity-provider account refused{" "}
              <time dateTime={m.identityRefused}>{formatLocal(m.identityRefused, timeZone)}</time>
            </p>
          ) : null}
          {m.identityBound && m.id !== me ? (
            <Form method="post">
              <input type="hidden" name="intent" value="resetIdentity" />
              <input type="hidden" name="userId" value={m.id} />
              <Button
                type="submit"
                variant="quiet"
                className="px-2.5 py-1"
                disabled={busy}
                aria-label={`Reset the sign-in identity of ${m.email}`}
              >
                Reset identity
              </Button>
            </Form>
          ) : null}
        </div>
      ),
    }),
    col.display({
      id: "actions",
      header: () => <span className="sr-only">Actions</span>,
      cell: ({ row: { original: m } }) =>
        m.id === me ? null : (
          <Form method="post">
            <input type="hidden" name="intent" value={m.status === "disabled" ? "enable" : "disable"} />
            <input type="hidden" name="userId" value={m.id} />
            <Button
              type="submit"
              variant={m.status === "disabled" ? "secondary" : "quiet"}
              className="px-2.5 py-1"
              disabled={busy}
              aria-label={`${m.status === "disabled" ? "Re-enable" : "Disable"} ${m.email}`}
            >
              {m.status === "disabled" ? "Re-enable" : "Disable"}
            </Button>
          </Form>
        ),
    }),
  ];

  return (
    <div className="space-y-6">
      <PageHeader
        title="People"
        question={`Who can sign in to Wallcast for ${organisation}, and what may each of them do?`}
      />

      {rowError ? <FormAlert>{rowError}</FormAlert> : null}

      <Card title="Invite someone">
        <Form method="post" className="grid gap-4 md:grid-cols-[1fr_1fr_1fr_auto] md:items-start">
          <input type="hidden" name="intent" value="invite" />
          <TextField
            label="E-mail address"
            name="email"
            type="email"
            autoComplete="off"
            required
            defaultValue={invite.value("email")}
            error={invite.errors.email}
            hint="The address they sign in with at their identity provider."
          />
          <TextField label="Name" name="name" required defaultValue={invite.value("name")} error={invite.errors.name} />
          <SelectField
            label="What they do"
            name="access"
            required
            defaultValue={invite.value("access", "")}
            // the model names the role or the contractor; this one choice sets both
            error={invite.errors.role ?? invite.errors.contractorId}
            hint={
              contractors.length === 0
                ? "Technicians can be invited once you have a contract with their company."
                : "Technicians see only the sites and work their company’s contract covers."
            }
          >
            <option value="" disabled>
              Choose…
            </option>
            <optgroup label={`Staff of ${organisation}`}>
              {ownerRoles.map((r) => (
                <option key={r} value={r}>
                  {roleLabels[r]}
                </option>
              ))}
            </optgroup>
            {contractors.length > 0 ? (
              <optgroup label="Contractor technician at">
                {contractors.map((c) => (
                  <option key={c.id} value={`${technicianPrefix}${c.id}`}>
                    {c.name}
                  </option>
                ))}
              </optgroup>
            ) : null}
          </SelectField>
          <div className="md:pt-6">
            <Button type="submit" disabled={busy}>
              {inviting ? "Inviting…" : "Invite"}
            </Button>
          </div>
        </Form>
        <p className="mt-3 text-xs text-ink-faint">
          An address belongs to one organisation only. Invited people sign in with their own identity provider; their
          first sign-in turns the invitation into an active account.
        </p>
      </Card>

      <DataTable
        data={members}
        columns={columns}
        caption="People who can sign in"
        searchLabel="Find a person"
        empty={
          <EmptyState title="Nobody here yet">
            Invite your colleagues above with their work e-mail address and a role; once you have a contract with a
            contractor, you can invite its technicians too.
          </EmptyState>
        }
      />
      <p className="text-xs text-ink-faint">
        Disabling someone ends their open sessions at once; re-enabling lets them sign in again. A person’s first
        sign-in binds their identity-provider account; a sign-in with the same address from another account is refused
        until you reset the identity (for someone whose account at the provider really changed). You cannot disable
        yourself or change your own role — ask another administrator. Every change is written to the audit trail.
      </p>

      {undelivered.length > 0 ? (
        <Card title={`E-mail that could not be delivered (${undelivered.length})`}>
          <ul id="undelivered" className="divide-y divide-rule text-sm">
            {undelivered.map((m) => (
              <li key={m.id} className="flex flex-wrap items-start gap-3 py-2">
                <div className="min-w-0 flex-1">
                  <div className="font-medium">{m.subject}</div>
                  <div className="text-ink-soft">
                    to {m.toEmail} · written {formatLocal(m.createdAt, timeZone)} ({timeZone}) · {m.attempts}{" "}
                    {m.attempts === 1 ? "attempt" : "attempts"}
                  </div>
                  <div className="text-xs text-warn">{m.why}</div>
                  {m.lastError ? <div className="text-xs text-ink-faint">Last answer: {m.lastError}</div> : null}
                </div>
                <Form method="post">
                  <input type="hidden" name="intent" value="resendEmail" />
                  <input type="hidden" name="emailId" value={m.id} />
                  <Button type="submit" variant="secondary" disabled={busy}>
                    Send again
                  </Button>
                </Form>
              </li>
            ))}
          </ul>
        </Card>
      ) : null}
    </div>
  );
}

export const meta: Route.MetaFunction = () => [{ title: "People · Wallcast" }];

export { RouteErrorBoundary as ErrorBoundary } from "~/components/route-error";
