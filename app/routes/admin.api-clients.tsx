import { createColumnHelper } from "@tanstack/react-table";
import { useState } from "react";
import { data, Form, useNavigation } from "react-router";
import { StatusBadge } from "~/components/badges";
import { Button } from "~/components/button";
import { DataTable } from "~/components/data-table";
import { FormAlert, TextField } from "~/components/field";
import { formFailure } from "~/components/form-failure";
import { Card, EmptyState, PageHeader } from "~/components/layout";
import { TickBox, tickedOf } from "~/components/tick-list";

import { apiScopes, createApiClient, listApiClients, revokeApiClient } from "~/models/api-clients.server";
import { rateLimitOf } from "~/services/rate-limit.server";
import { db } from "~/services/db.server";
import { redirectWithFlash } from "~/services/flash.server";
import { requireOwnerUser } from "~/services/guards.server";
import { formAction, intentOf, readForm } from "~/services/respond.server";
import { requestIdOf } from "~/services/problem.server";
import type { Route } from "./+types/admin.api-clients";

const intents = ["create", "revoke"] as const;

const scopeHelp: Record<string, string> = {
  "lims:write": "push laboratory (LIMS) samples",
  "results:read": "read approved corrosion rates and surveys",
  "outlook:read": "read circuit remaining life and next inspection dates",
};

export async function loader(args: Route.LoaderArgs) {
  const user = requireOwnerUser(args, "manageApiClients");
  const clients = await listApiClients(db(), user.ownerId);
  const limit = rateLimitOf("apiClient");
  return {
    scopes: [...apiScopes],
    defaultPerMinute: Math.round((limit.points * 60) / limit.seconds),
    clients: clients.map((c) => ({
      id: c.id,
      name: c.name,
      scopes: c.scopes,
      tokenHint: c.token_hint,
      createdAt: new Date(c.created_at).toISOString(),
      createdBy: c.created_by_email,
      lastUsedAt: c.last_used_at ? new Date(c.last_used_at).toISOString() : null,
      revokedAt: c.revoked_at ? new Date(c.revoked_at).toISOString() : null,
      revokedBy: c.revoked_by_email,
      expiresAt: c.expires_at ? new Date(c.expires_at).toISOString() : null,
      requestsPerMinute: c.requests_per_minute,
    })),
  };
}

export async function action(args: Route.ActionArgs) {
  const user = requireOwnerUser(args, "manageApiClients");
  const requestId = requestIdOf(args.context);
  const values = await readForm(args.request);
  const intent = intentOf(values, intents);

  if (intent === "create")
    return formAction(values, async () => {
      const created = await createApiClient(
        db(),
        user,
        {
          name: values.name ?? "",
          scopes: tickedOf(values, "scopes"),
          expiresOn: values.expiresOn,
          requestsPerMinute: values.requestsPerMinute,
        },
        requestId,
      );
      // The token is in this one response only: never cached, never redirected through a cookie.
      return data(
        { intent, created: { name: created.name, token: created.token, tokenHint: created.tokenHint } },
        { headers: { "Cache-Control": "no-store" } },
      );
    });

  return formAction(values, async () => {
    const revoked = await revokeApiClient(db(), user, values.clientId ?? "", requestId);
    return redirectWithFlash("/admin/api-clients", {
      tone: revoked.changed ? "ok" : "warn",
      message: revoked.changed
        ? `${revoked.name} is revoked; its token stops working from its next request.`
        : `${revoked.name} was already revoked.`,
    });
  });
}

/** The page that shows a new token must never be cached: the action's no-store reaches the response. */
export const headers: Route.HeadersFunction = ({ actionHeaders, loaderHeaders }) =>
  actionHeaders.has("Cache-Control") ? actionHeaders : loaderHeaders;

type Client = Awaited<ReturnType<typeof loader>>["clients"][number];
const col = createColumnHelper<Client>();

function utcMinute(iso: string | null) {
  return iso ? `${iso.slice(0, 10)} ${iso.slice(11, 16)} UTC` : null;
}

function TokenOnce({ name, token }: { name: string; token: string }) {
  const [copied, setCopied] = useState(false);
  return (
    <section
      aria-labelledby="new-token-title"
      className="rounded-lg border-2 border-tide-500 bg-tide-50 p-4"
      data-testid="new-token"
    >
      <h2 id="new-token-title" className="text-base font-semibold text-tide-900">
        Token for {name} — copy it now
      </h2>
      <p className="mt-1 text-sm text-ink-soft">
        This is the only time Wallcast shows this token. It keeps only a fingerprint, so a lost token cannot be
        recovered: revoke the client and create a new one instead. Send it as <code>Authorization: Bearer …</code>.
      </p>
      <div className="mt-3 flex flex-wrap items-end gap-2">
        <div className="min-w-0 flex-1">
          <label htmlFor="new-token" className="block text-xs font-medium text-ink-soft">
            Bearer token
          </label>
          <input
            id="new-token"
            readOnly
            value={token}
            onFocus={(e) => e.currentTarget.select()}
            className="mt-0.5 w-full rounded-md border border-rule bg-white px-2.5 py-1.5 font-mono text-sm"
          />
        </div>
        <Button
          variant="secondary"
          onClick={async () => {
            await navigator.clipboard?.writeText(token);
            setCopied(true);
          }}
        >
          {copied ? "Copied" : "Copy"}
        </Button>
      </div>
    </section>
  );
}

export default function ApiClients({ loaderData, actionData }: Route.ComponentProps) {
  const { clients, scopes, defaultPerMinute } = loaderData;
  const navigation = useNavigation();
  const busy = navigation.state === "submitting";
  const created = actionData && "created" in actionData ? actionData.created : undefined;
  const form = formFailure(actionData, { intent: "create" });
  const columns = [
    col.accessor("name", {
      header: "Client",
      cell: ({ row: { original: c } }) => (
        <div>
          <div className="font-medium text-ink">{c.name}</div>
          <div className="font-mono text-xs text-ink-faint" title="The token's first characters">
            {c.tokenHint}…
          </div>
        </div>
      ),
    }),
    col.accessor((c) => c.scopes.join(" "), {
      id: "scopes",
      header: "May",
      cell: ({ row: { original: c } }) => (
        <span className="flex flex-wrap gap-1">
          {c.scopes.map((s) => (
            <code key={s} className="rounded border border-rule bg-paper px-1.5 py-0.5 text-xs" title={scopeHelp[s]}>
              {s}
            </code>
          ))}
        </span>
      ),
    }),
    col.accessor("createdAt", {
      header: "Created",
      cell: ({ row: { original: c } }) => (
        <div className="whitespace-nowrap">
          <span className="num">{utcMinute(c.createdAt)}</span>
          {c.createdBy ? <div className="text-xs text-ink-faint">{c.createdBy}</div> : null}
        </div>
      ),
    }),
    col.accessor((c) => c.lastUsedAt ?? "", {
      id: "lastUsed",
      header: "Last used",
      cell: ({ row: { original: c } }) => (
        <span className="num whitespace-nowrap">
          {utcMinute(c.lastUsedAt) ?? <span className="text-ink-faint">never</span>}
        </span>
      ),
    }),
    col.accessor((c) => c.requestsPerMinute ?? defaultPerMinute, {
      id: "limit",
      header: "Limit",
      cell: ({ row: { original: c } }) => (
        <span className="num whitespace-nowrap">
          {c.requestsPerMinute ?? defaultPerMinute} a minute
          {c.requestsPerMinute === null ? <span className="text-xs text-ink-faint"> (default)</span> : null}
        </span>
      ),
    }),
    col.accessor(
      (c) => (c.revokedAt ? "revoked" : c.expiresAt && c.expiresAt <= new Date().toISOString() ? "expired" : "active"),
      {
        id: "status",
        header: "Status",
        cell: ({ row: { original: c } }) =>
          !c.revokedAt && c.expiresAt && c.expiresAt <= new Date().toISOString() ? (
            <div>
              <StatusBadge status="expired" />
              <div className="num mt-0.5 whitespace-nowrap text-xs text-ink-faint">{utcMinute(c.expiresAt)}</div>
            </div>
          ) : c.revokedAt ? (
            <div>
              <StatusBadge status="revoked" />
              <div className="num mt-0.5 whitespace-nowrap text-xs text-ink-faint">
                {utcMinute(c.revokedAt)}
                {c.revokedBy ? ` · ${c.revokedBy}` : ""}
              </div>
            </div>
          ) : (
            <div>
              <StatusBadge status="active" />
              {c.expiresAt ? (
                <div className="num mt-0.5 whitespace-nowrap text-xs text-ink-faint">
                  until {utcMinute(c.expiresAt)}
                </div>
              ) : null}
            </div>
          ),
      },
    ),
    col.display({
      id: "actions",
      header: () => <span className="sr-only">Actions</span>,
      cell: ({ row: { original: c } }) =>
        c.revokedAt ? null : (
          <Form method="post">
            <input type="hidden" name="intent" value="revoke" />
            <input type="hidden" name="clientId" value={c.id} />
            <Button
              type="submit"
              variant="quiet"
              className="px-2.5 py-1"
              disabled={busy}
              aria-label={`Revoke ${c.name}`}
            >
              Revoke
            </Button>
          </Form>
        ),
    }),
  ];

  return (
    <div className="space-y-6">
      <PageHeader
        title="API clients"
        question="Which of your systems may reach Wallcast’s API, with what permissions, and when did each last call?"
      />

      {created ? <TokenOnce name={created.name} token={created.token} /> : null}
      {form.errors.form ? <FormAlert>{form.errors.form}</FormAlert> : null}

      <Card title="New client">
        {/* a new, empty form once a client is created (its token is shown above) */}
        <Form method="post" className="space-y-4" key={created ? created.tokenHint : "form"} noValidate>
          <input type="hidden" name="intent" value="create" />
          <div className="max-w-md">
            <TextField
              label="Name"
              name="name"
              defaultValue={form.value("name")}
              error={form.errors.name}
              hint="The system that will use the token, e.g. “Brackwater LIMS”."
            />
          </div>
          <div className="grid max-w-md gap-4 sm:grid-cols-2">
            <TextField
              label="Last day it works (UTC)"
              name="expiresOn"
              type="date"
              defaultValue={form.value("expiresOn")}
              error={form.errors.expiresOn}
              hint="Leave empty for no expiry."
            />
            <TextField
              label="Requests a minute"
              name="requestsPerMinute"
              inputMode="numeric"
              defaultValue={form.value("requestsPerMinute")}
              error={form.errors.requestsPerMinute}
              hint={`Leave empty for the default, ${defaultPerMinute}.`}
            />
          </div>
          <fieldset>
            <legend className="text-sm font-medium text-ink">Permissions</legend>
            <div className="mt-2 space-y-1.5">
              {scopes.map((s) => (
                <TickBox
                  key={s}
                  form={form}
                  list="scopes"
                  value={s}
                  stored={false}
                  label={
                    <>
                      <code className="text-xs">{s}</code> <span className="text-ink-soft">— {scopeHelp[s]}</span>
                    </>
                  }
                />
              ))}
            </div>
            {form.errors.scopes ? (
              <p className="mt-1 text-xs font-medium text-bad" role="alert">
                {form.errors.scopes}
              </p>
            ) : null}
          </fieldset>
          <Button type="submit" disabled={busy}>
            Create client and show its token
          </Button>
        </Form>
      </Card>

      <DataTable
        data={clients}
        columns={columns}
        caption="API clients"
        searchLabel="Find a client"
        empty={
          <EmptyState title="No API clients yet">
            Create one above for each system that exchanges data with Wallcast — for example your laboratory system
            pushing samples — and give it only the permissions it needs.
          </EmptyState>
        }
      />
    </div>
  );
}

export const meta: Route.MetaFunction = () => [{ title: "API clients · Wallcast" }];

export { RouteErrorBoundary as ErrorBoundary } from "~/components/route-error";
