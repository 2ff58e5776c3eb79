/**
 * How a form tells what is wrong: a summary at the top (announced, focused, with a link to each field) and the
 * message beside each field, tied to it with aria-describedby and aria-invalid. The form's inputs are left as
 * they are, so nothing typed is lost.
 */
import type { ApiError } from '../lib/shared/api-client';
import { useFocusWhen } from '../lib/shared/focus';

/** Messages the API gave for one field (several joined), or undefined. */
export function messageFor(error: ApiError | null | undefined, field: string): string | undefined {
  const list = error?.errors.filter((e) => e.field === field).map((e) => e.message) ?? [];
  return list.length ? list.join('; ') : undefined;
}

/** Props for the input of `field`: its id, and when it has a problem aria-invalid and aria-describedby. */
export function fieldProps(error: ApiError | null | undefined, field: string, id: string) {
  const problem = messageFor(error, field);
  return { id, 'aria-invalid': problem ? true : undefined, 'aria-describedby': problem ? `${id}-problem` : undefined } as const;
}

/** The message beside a field (renders nothing when the field is fine). */
export function FieldProblem({ error, field, id }: { error: ApiError | null | undefined; field: string; id: string }) {
  const problem = messageFor(error, field);
  return problem ? (
    <span id={`${id}-problem`} className="text-sm font-semibold text-error" data-field-problem={field}>
      ✕ {problem}
    </span>
  ) : null;
}

/**
 * The summary at the top of the form. `fields` maps an API field name to the id of its input and a label;
 * problems of fields not on the form (or without a field) are listed as plain text.
 */
export function ErrorSummary({ error, fields }: { error: ApiError | null | undefined; fields: Record<string, { id: string; label: string }> }) {
  const ref = useFocusWhen<HTMLDivElement>(error);
  if (!error) return null;
  return (
    <div ref={ref} className="notice notice-error" role="alert" tabIndex={-1} data-error-summary>
      <p className="font-semibold">✕ {error.error}</p>
      {error.errors.length > 0 && (
        <ul className="ml-5 list-disc">
          {error.errors.map((p, i) => {
            const target = p.field ? fields[p.field] : undefined;
            const where = [p.line !== undefined ? `line ${p.line}` : '', p.column ?? ''].filter(Boolean).join(', ');
            const text = `${target?.label ?? p.field ?? where ?? ''}${target || p.field || where ? ': ' : ''}${p.message}${p.expected ? ` (expected ${p.expected})` : ''}`;
            return (
              <li key={i}>
                {target ? (
                  <a
                    href={`#${target.id}`}
                    onClick={(e) => {
                      e.preventDefault();
                      document.getElementById(target.id)?.focus();
                    }}
                  >
                    {text}
                  </a>
                ) : (
                  text
                )}
              </li>
            );
          })}
        </ul>
      )}
    </div>
  );
}
