/**
 * What each audit event means, in the words people read (the stored code stays for
 * machines and the CSV). Pure: every screen that lists audit events uses this one table.
 */
const words: Record<string, string> = {
  "api_client.created": "API client created",
  "api_client.revoked": "API client revoked",
  "attachment.uploaded": "photo or lab sheet attached",
  "attachment.removed": "photo or lab sheet removed",
  "circuit.created": "circuit added",
  "circuit.updated": "circuit edited",
  "contract.created": "contract added",
  "contract.updated": "contract edited",
  "contract.ended": "contract ended",
  "contractor.added": "contractor company added",
  "coupon.created": "coupon added to stock",
  "coupon.installed": "coupon installed",
  "coupon.removed": "coupon removed",
  "lab_result.entered": "lab results entered",
  "lab_result.edited": "lab results edited",
  "member.invited": "person invited",
  "member.activated": "first sign-in",
  "member.role_changed": "role changed",
  "member.disabled": "person disabled",
  "member.enabled": "person enabled again",
  "monitoring_point.created": "monitoring point added",
  "monitoring_point.updated": "monitoring point edited",
  "owner_settings.updated": "severity thresholds or minimum exposure changed",
  "process_unit.created": "process unit added",
  "process_unit.updated": "process unit edited",
  "site.created": "site added",
  "site.updated": "site edited",
  "submission.created": "draft started",
  "submission.submitted": "submitted for review",
  "submission.approved": "approved",
  "submission.returned": "returned to the contractor",
  "submission.correction_opened": "correction opened",
  "submission.superseded": "superseded by its approved correction",
};

/** The event in words; an unknown code is shown as it is stored. */
export const auditActionWords = (action: string): string => words[action] ?? action;
