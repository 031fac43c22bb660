import { useCallback, useEffect, useId, useRef, useState, type ReactNode } from "react";
import { useDropzone, type FileRejection } from "react-dropzone";
import {
  attachmentKindLabels,
  attachmentKinds,
  surveyAttachmentKinds,
  type AttachmentKind,
  type AttachmentView,
} from "~/services/attachment-kinds";
import { Button } from "./button";

/**
 * Photos and lab sheets of a removed coupon: drop or choose several files, say what
 * each shows, watch each upload's progress, and remove a file again until the submission
 * is submitted. The server decides what a file is from its bytes; what the browser
 * guesses here only shapes the choices offered.
 */

export { attachmentKindLabels };
const kindOrder: readonly AttachmentKind[] = attachmentKinds;

const MAX_BYTES = 20 * 1024 * 1024;
const accept = {
  "image/jpeg": [".jpg", ".jpeg"],
  "image/png": [".png"],
  "image/webp": [".webp"],
  "application/pdf": [".pdf"],
};
const acceptedWords = "Attach photos as JPEG, PNG or WebP, and lab sheets as PDF.";

export const formatSize = (bytes: number) =>
  bytes < 1024 * 1024 ? `${Math.max(1, Math.round(bytes / 1024))} kB` : `${(bytes / (1024 * 1024)).toFixed(1)} MB`;

type Looks = "image" | "pdf" | "csv" | "unknown";

/** The first bytes say whether a file looks like a PDF (offered as a sheet only) or an image; a CSV goes by its name. */
async function looksLike(file: File): Promise<Looks> {
  if (/\.csv$/i.test(file.name) || file.type === "text/csv") return "csv";
  try {
    const b = new Uint8Array(await file.slice(0, 12).arrayBuffer());
    const ascii = (from: number, to: number) => String.fromCharCode(...b.slice(from, to));
    if (ascii(0, 5) === "%PDF-") return "pdf";
    if (b[0] === 0xff && b[1] === 0xd8 && b[2] === 0xff) return "image";
    if (b[0] === 0x89 && ascii(1, 4) === "PNG") return "image";
    if (ascii(0, 4) === "RIFF" && ascii(8, 12) === "WEBP") return "image";
  } catch {
    /* unreadable here: the server will say */
  }
  return "unknown";
}

type Queued = {
  key: number;
  file: File;
  looks: Looks;
  /** "" until the person says what the photo shows: nothing uploads without a kind. */
  kind: AttachmentKind | "";
  status: "ready" | "uploading" | "failed";
  /** 0…1 while uploading */
  progress: number;
  error?: string;
  /** refused for good (wrong type, too large): no point in trying again */
  final?: boolean;
  preview?: string;
};

function rejectionMessage(r: FileRejection): string {
  const name = `“${r.file.name}”`;
  const code = r.errors[0]?.code;
  if (code === "file-too-large")
    return `${name} is ${formatSize(r.file.size)}; the limit is 20 MB per file. Save it at a smaller size and try again.`;
  if (code === "file-invalid-type") return `${name} is not a photo or PDF. ${acceptedWords}`;
  return `${name} cannot be attached: ${r.errors[0]?.message ?? "unknown reason"}.`;
}

/** The problem+json detail of a refused upload, in the server's words. */
function problemDetail(status: number, body: string): string {
  if (status === 401)
    return "Your sign-in has ended, so the file was not saved. Reload the page to sign in again, then attach it once more.";
  try {
    const parsed = JSON.parse(body) as { detail?: unknown };
    if (typeof parsed.detail === "string" && parsed.detail) return parsed.detail;
  } catch {
    /* not JSON */
  }
  if (status === 413) return "The file is larger than 20 MB, the limit per file.";
  if (status >= 500) return "The server could not save the file just now. Try again in a few minutes.";
  return `The upload was refused (HTTP ${status}). Reload the page and try again.`;
}

/** What differs between a coupon's files and a survey's: where they go, their kinds and the words. */
export type DropzoneSetup = {
  /** The attachments endpoint (POST a file, DELETE ?id=). */
  endpoint: string;
  kinds: readonly AttachmentKind[];
  /** The kind a PDF is filed as. */
  sheetKind: AttachmentKind;
  /** The kind a CSV file is filed as (none: CSV files are refused). */
  csvKind?: AttachmentKind;
  accept: Record<string, string[]>;
  words: { drop: string; hint: string; empty: string; locked: string; button: string; pdf: string };
};

const couponSetup = (exposureId: string): DropzoneSetup => ({
  endpoint: `/lab/${exposureId}/attachments`,
  kinds: kindOrder,
  sheetKind: "lab_sheet",
  accept,
  words: {
    drop: "Drop photos or the lab sheet here, or click to choose files",
    hint: "JPEG, PNG or WebP photos and PDF lab sheets, up to 20 MB each. Several at once is fine; you say what each one shows before it uploads.",
    empty:
      "Nothing attached yet. Add a photo of the coupon as removed (deposits, pits), one after cleaning, and the lab’s sheet, so the owner’s engineer can check the result.",
    locked: "These results have been sent to the owner for review, so its photos and lab sheets can no longer change.",
    button: "Add photos or a lab sheet: drop files here, or press Enter to choose files",
    pdf: "A PDF is attached as the lab sheet.",
  },
});

export function AttachmentDropzone({
  exposureId,
  setup: given,
  attachments: initial,
  locked,
}: {
  /** A coupon's files (the lab page); or give `setup`. */
  exposureId?: string;
  setup?: DropzoneSetup;
  attachments: AttachmentView[];
  /** true once the results are in a submission sent for review or approved */
  locked: boolean;
}) {
  const setup = given ?? couponSetup(exposureId ?? "");
  const [attachments, setAttachments] = useState(initial);
  const [queue, setQueue] = useState<Queued[]>([]);
  const [announcement, setAnnouncement] = useState("");
  const [removing, setRemoving] = useState<Record<string, string | "busy">>({});
  const nextKey = useRef(1);
  const requests = useRef(new Map<number, XMLHttpRequest>());
  const hintId = useId();

  useEffect(() => setAttachments(initial), [initial]);
  // Uploads still running stop when the page goes away.
  useEffect(
    () => () => {
      for (const xhr of requests.current.values()) xhr.abort();
    },
    [],
  );

  // Files still waiting or on their way are lost if the tab closes: ask first.
  const unsaved = queue.some((i) => i.status === "ready" || i.status === "uploading");
  useEffect(() => {
    if (!unsaved) return;
    const warn = (e: BeforeUnloadEvent) => e.preventDefault();
    window.addEventListener("beforeunload", warn);
    return () => window.removeEventListener("beforeunload", warn);
  }, [unsaved]);

  const update = (key: number, change: Partial<Queued>) =>
    setQueue((q) => q.map((item) => (item.key === key ? { ...item, ...change } : item)));
  const drop = (key: number) =>
    setQueue((q) => {
      const item = q.find((i) => i.key === key);
      if (item?.preview) URL.revokeObjectURL(item.preview);
      return q.filter((i) => i.key !== key);
    });

  const onDrop = useCallback(async (files: File[], rejections: FileRejection[]) => {
    const added: Queued[] = await Promise.all(
      files.map(async (file) => {
        const looks = await looksLike(file);
        return {
          key: nextKey.current++,
          file,
          looks,
          kind: looks === "pdf" ? setup.sheetKind : looks === "csv" ? (setup.csvKind ?? "") : "",
          status: "ready",
          progress: 0,
          preview: looks === "image" ? URL.createObjectURL(file) : undefined,
        } satisfies Queued;
      }),
    );
    const refused: Queued[] = rejections.map((r) => ({
      key: nextKey.current++,
      file: r.file,
      looks: "unknown",
      kind: "",
      status: "failed",
      progress: 0,
      error: rejectionMessage(r),
      final: true,
    }));
    setQueue((q) => [...q, ...added, ...refused]);
    const count = added.length + refused.length;
    setAnnouncement(
      `${count} file${count === 1 ? "" : "s"} added${refused.length ? `, ${refused.length} cannot be attached` : ""}. Choose what each shows, then upload.`,
    );
    // the setup is fixed for the page
  }, []);

  const { getRootProps, getInputProps, isDragActive } = useDropzone({
    onDrop,
    accept: setup.accept,
    maxSize: MAX_BYTES,
    multiple: true,
    disabled: locked,
  });

  function upload(item: Queued) {
    if (!item.kind) {
      update(item.key, { error: "Choose what this file shows before it uploads." });
      return;
    }
    const xhr = new XMLHttpRequest();
    requests.current.set(item.key, xhr);
    update(item.key, { status: "uploading", progress: 0, error: undefined });
    xhr.open("POST", setup.endpoint);
    xhr.setRequestHeader("Accept", "application/json");
    // fetch() cannot report upload progress; XMLHttpRequest can.
    xhr.upload.onprogress = (e) => {
      if (e.lengthComputable) update(item.key, { progress: e.loaded / e.total });
    };
    xhr.onload = () => {
      requests.current.delete(item.key);
      if (xhr.status === 201) {
        const view = JSON.parse(xhr.responseText) as AttachmentView;
        setAttachments((list) => [...list.filter((a) => a.id !== view.id), view]);
        drop(item.key);
        setAnnouncement(`“${view.name}” attached as ${attachmentKindLabels[view.kind].toLowerCase()}.`);
      } else {
        const error = problemDetail(xhr.status, xhr.responseText);
        update(item.key, {
          status: "failed",
          error,
          final: xhr.status === 413 || xhr.status === 415 || xhr.status === 409,
        });
        setAnnouncement(error);
      }
    };
    xhr.onerror = () => {
      requests.current.delete(item.key);
      update(item.key, {
        status: "failed",
        error: "The connection dropped during the upload, so the file was not saved. Check the network and try again.",
      });
    };
    xhr.onabort = () => {
      requests.current.delete(item.key);
      update(item.key, { status: "ready", progress: 0, error: "Upload cancelled; nothing was saved." });
    };
    const form = new FormData();
    form.append("kind", item.kind);
    form.append("file", item.file, item.file.name);
    xhr.send(form);
  }

  async function remove(a: AttachmentView) {
    setRemoving((r) => ({ ...r, [a.id]: "busy" }));
    let error = "";
    try {
      const res = await fetch(`${setup.endpoint}?id=${encodeURIComponent(a.id)}`, {
        method: "DELETE",
        headers: { Accept: "application/json" },
      });
      if (res.status === 204 || res.status === 404) {
        setAttachments((list) => list.filter((x) => x.id !== a.id));
        setAnnouncement(`“${a.name}” removed.`);
      } else {
        error = problemDetail(res.status, await res.text());
      }
    } catch {
      error = "The connection dropped, so the file was not removed. Try again.";
    }
    setRemoving((r) => {
      const { [a.id]: _done, ...rest } = r;
      return error ? { ...rest, [a.id]: error } : rest;
    });
  }

  const ready = queue.filter((i) => i.status === "ready" && i.kind !== "");
  const unkinded = queue.filter((i) => i.status !== "uploading" && !i.final && i.kind === "").length;
  return (
    <div className="space-y-4">
      {locked ? (
        <p className="text-sm text-ink-soft">{setup.words.locked}</p>
      ) : (
        <div
          {...getRootProps({
            role: "button",
            "aria-label": setup.words.button,
            "aria-describedby": hintId,
          })}
          className={`no-print flex cursor-pointer flex-col items-center justify-center gap-1 rounded-lg border-2 border-dashed px-4 py-6 text-center transition-colors focus-visible:outline-2 focus-visible:outline-offset-2 focus-visible:outline-tide-500 ${
            isDragActive ? "border-tide-500 bg-tide-50" : "border-rule bg-paper hover:border-tide-300 hover:bg-tide-50"
          }`}
        >
          <input {...getInputProps()} aria-label="Choose photos or a lab sheet" />
          <UploadIcon />
          <p className="text-sm font-medium text-ink">
            {isDragActive ? "Drop the files to add them" : setup.words.drop}
          </p>
          <p id={hintId} className="text-xs text-ink-faint">
            {setup.words.hint}
          </p>
        </div>
      )}

      {queue.length > 0 ? (
        <div>
          <div className="mb-2 flex items-center justify-between gap-2">
            <h3 className="text-sm font-semibold">
              To upload <span className="font-normal text-ink-faint">(not saved until uploaded)</span>
            </h3>
            {unkinded > 0 ? (
              <p className="text-xs text-ink-soft" role="status">
                Choose what {unkinded === 1 ? "one file" : `${unkinded} files`} show{unkinded === 1 ? "s" : ""} before{" "}
                {unkinded === 1 ? "it uploads" : "they upload"}.
              </p>
            ) : null}
            {ready.length > 1 ? (
              <Button variant="secondary" onClick={() => ready.forEach(upload)}>
                Upload all {ready.length}
              </Button>
            ) : null}
          </div>
          <ul className="divide-y divide-rule rounded-md border border-rule" aria-label="Files to upload">
            {queue.map((item) => (
              <QueuedRow
                key={item.key}
                item={item}
                onKind={(kind) => update(item.key, { kind, ...(item.status === "ready" ? { error: undefined } : {}) })}
                onUpload={() => upload(item)}
                onCancel={() => requests.current.get(item.key)?.abort()}
                onDrop={() => drop(item.key)}
                setup={setup}
              />
            ))}
          </ul>
        </div>
      ) : null}

      <div>
        <h3 className="mb-2 text-sm font-semibold">Attached ({attachments.length})</h3>
        {attachments.length === 0 ? (
          <p className="text-sm text-ink-soft">{setup.words.empty}</p>
        ) : (
          <AttachmentGallery
            attachments={attachments}
            renderActions={(a) =>
              a.canRemove && !locked ? (
                <div className="mt-1">
                  <Button
                    variant="quiet"
                    className="-ml-2 px-2 py-1 text-xs"
                    disabled={removing[a.id] === "busy"}
                    onClick={() => remove(a)}
                    aria-label={`Remove ${a.name}`}
                  >
                    {removing[a.id] === "busy" ? "Removing…" : "Remove"}
                  </Button>
                  {removing[a.id] && removing[a.id] !== "busy" ? (
                    <p className="text-xs text-bad" role="alert">
                      {removing[a.id]}
                    </p>
                  ) : null}
                </div>
              ) : null
            }
          />
        )}
      </div>
      <p className="sr-only" aria-live="polite">
        {announcement}
      </p>
    </div>
  );
}

function QueuedRow({
  item,
  onKind,
  onUpload,
  onCancel,
  onDrop,
  setup,
}: {
  setup: DropzoneSetup;
  item: Queued;
  onKind: (kind: AttachmentKind) => void;
  onUpload: () => void;
  onCancel: () => void;
  onDrop: () => void;
}) {
  const selectId = useId();
  const errorId = useId();
  const refused = item.status === "failed" && Boolean(item.final);
  const kinds: readonly AttachmentKind[] =
    item.looks === "pdf"
      ? [setup.sheetKind]
      : item.looks === "csv" && setup.csvKind
        ? [setup.csvKind]
        : setup.kinds.filter((k) => k !== setup.csvKind);
  const percent = Math.round(item.progress * 100);
  return (
    <li className="flex flex-wrap items-start gap-3 p-3" data-testid="queued-file">
      <div className="flex size-14 shrink-0 items-center justify-center overflow-hidden rounded border border-rule bg-paper">
        {item.preview ? <img src={item.preview} alt="" className="size-full object-cover" /> : <DocumentIcon />}
      </div>
      <div className="min-w-0 flex-1 space-y-1.5">
        <p className="truncate text-sm font-medium text-ink" title={item.file.name}>
          {item.file.name} <span className="font-normal text-ink-faint">· {formatSize(item.file.size)}</span>
        </p>
        <div className={`flex flex-wrap items-center gap-2 ${refused ? "hidden" : ""}`}>
          <label htmlFor={selectId} className="text-xs text-ink-soft">
            Shows
          </label>
          <select
            id={selectId}
            value={item.kind}
            onChange={(e) => onKind(e.target.value as AttachmentKind)}
            required
            aria-invalid={item.kind === "" ? true : undefined}
            disabled={item.status === "uploading" || kinds.length === 1 || refused}
            aria-describedby={item.error ? errorId : undefined}
            className="rounded-md border border-rule bg-white px-2 py-1 text-sm"
          >
            {item.kind === "" ? <option value="">Choose what it shows</option> : null}
            {kinds.map((k) => (
              <option key={k} value={k}>
                {attachmentKindLabels[k]}
              </option>
            ))}
          </select>
          {item.looks === "pdf" ? <span className="text-xs text-ink-faint">{setup.words.pdf}</span> : null}
        </div>
        {item.status === "uploading" ? (
          <div className="flex items-center gap-2">
            <div
              role="progressbar"
              aria-label={`Uploading ${item.file.name}`}
              aria-valuemin={0}
              aria-valuemax={100}
              aria-valuenow={percent}
              className="h-2 w-full max-w-xs overflow-hidden rounded-full bg-tide-100"
            >
              <div className="h-full rounded-full bg-tide-600 transition-[width]" style={{ width: `${percent}%` }} />
            </div>
            <span className="num text-xs text-ink-soft">{percent === 100 ? "checking…" : `${percent} %`}</span>
          </div>
        ) : null}
        {item.error ? (
          <p id={errorId} className="text-xs font-medium text-bad" role="alert">
            {item.error}
          </p>
        ) : null}
      </div>
      <div className="flex shrink-0 gap-1">
        {item.status === "uploading" ? (
          <Button variant="secondary" className="px-2.5 py-1 text-xs" onClick={onCancel}>
            Cancel
          </Button>
        ) : (
          <>
            {!refused ? (
              <Button
                className="px-2.5 py-1 text-xs"
                onClick={onUpload}
                disabled={item.kind === ""}
                title={item.kind === "" ? "Choose what the file shows first" : undefined}
                aria-label={`${item.status === "failed" ? "Try again to upload" : "Upload"} ${item.file.name}`}
              >
                {item.status === "failed" ? "Try again" : "Upload"}
              </Button>
            ) : null}
            <Button
              variant="quiet"
              className="px-2.5 py-1 text-xs"
              onClick={onDrop}
              aria-label={`Take ${item.file.name} off the list`}
            >
              {item.status === "failed" ? "Dismiss" : "Take off"}
            </Button>
          </>
        )}
      </div>
    </li>
  );
}

/**
 * Thumbnails of a coupon's attachments (as removed, after cleaning, lab sheet, in that
 * order), each opening the original in a new tab; PDF lab sheets as an icon with the name.
 */
export function AttachmentGallery({
  attachments,
  renderActions,
}: {
  attachments: AttachmentView[];
  renderActions?: (a: AttachmentView) => ReactNode;
}) {
  const order: readonly AttachmentKind[] = [...kindOrder, ...surveyAttachmentKinds];
  const ordered = [...attachments].sort(
    (a, b) => order.indexOf(a.kind) - order.indexOf(b.kind) || a.createdAt.localeCompare(b.createdAt),
  );
  return (
    <ul className="grid grid-cols-[repeat(auto-fill,minmax(9rem,1fr))] gap-3" aria-label="Photos and lab sheets">
      {ordered.map((a) => (
        <li key={a.id} className="min-w-0" data-testid="attachment">
          <a
            href={a.url}
            target="_blank"
            rel="noopener"
            className="group block overflow-hidden rounded-md border border-rule bg-paper no-underline hover:border-tide-300"
            title={`Open ${a.name} (${formatSize(a.byteSize)}) in a new tab`}
          >
            {a.thumbnailUrl ? (
              <img
                src={a.thumbnailUrl}
                alt={`${attachmentKindLabels[a.kind]}: ${a.name}`}
                loading="lazy"
                className="aspect-[4/3] w-full bg-tide-50 object-cover"
              />
            ) : (
              <span className="flex aspect-[4/3] w-full flex-col items-center justify-center gap-1 bg-panel p-2 text-center">
                <DocumentIcon large />
                <span className="text-xs font-medium text-tide-700">
                  {a.contentType === "text/csv" ? "CSV · download" : "PDF · open"}
                </span>
              </span>
            )}
          </a>
          <p className="mt-1 text-[0.7rem] font-semibold uppercase tracking-wide text-ink-soft">
            {attachmentKindLabels[a.kind]}
          </p>
          <p className="truncate text-xs text-ink" title={a.name}>
            {a.name}
          </p>
          <p
            className="truncate text-xs text-ink-faint"
            title={`${formatSize(a.byteSize)}, attached by ${a.uploadedBy}`}
          >
            {formatSize(a.byteSize)} · {a.uploadedBy}
          </p>
          {renderActions?.(a)}
        </li>
      ))}
    </ul>
  );
}

function UploadIcon() {
  return (
    <svg
      aria-hidden="true"
      viewBox="0 0 24 24"
      className="size-7 text-tide-500"
      fill="none"
      stroke="currentColor"
      strokeWidth={1.6}
      strokeLinecap="round"
      strokeLinejoin="round"
    >
      <path d="M12 15V4m0 0-4 4m4-4 4 4" />
      <path d="M4 15v3a2 2 0 0 0 2 2h12a2 2 0 0 0 2-2v-3" />
    </svg>
  );
}

function DocumentIcon({ large = false }: { large?: boolean }) {
  return (
    <svg
      aria-hidden="true"
      viewBox="0 0 24 24"
      className={`${large ? "size-10" : "size-6"} text-tide-600`}
      fill="none"
      stroke="currentColor"
      strokeWidth={1.5}
      strokeLinecap="round"
      strokeLinejoin="round"
    >
      <path d="M14 3H7a2 2 0 0 0-2 2v14a2 2 0 0 0 2 2h10a2 2 0 0 0 2-2V8z" />
      <path d="M14 3v5h5" />
      <path d="M9 13h6M9 17h4" />
    </svg>
  );
}
