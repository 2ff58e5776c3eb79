/** Usage texts of the command line (kept apart so --help loads no engine code). */
export const FIT_USAGE = `usage: offsetry fit --model NOMINAL.json --data SESSION.csv --out CALIBRATED.json
                   [--report REPORT.json] [--holdout 0.2] [--seed 1] [--loss huber|cauchy]
                   [--loss-scale-mm 0.05] [--exclude P12,P30] [--noise-mm 0.05] [--allow-outside-limits]
                   [--length-bound 5] [--angle-bound 1] [--tool-fixture]

  --model      nominal arm geometry (offsetry-arm/1 JSON)
  --data       measurement session (CSV: pose,q1..qn,x,y,z[,split])
  --out        calibrated geometry to write (same format, base and tool filled in)
  --report     fit report to write (JSON)
  --holdout    fraction of poses held out for validation when the session has no split
               column (default 0.2; 0 = none)
  --seed       seed of the hold-out draw (default 1)
  --loss       robust loss that down-weights gross errors: huber or cauchy (default none:
               least squares); standard errors then use the sandwich estimator
  --loss-scale-mm  3-D error at which the robust loss starts to down-weight (default 0.05)
  --exclude    poses to leave out: labels (all visits) or line:N, comma-separated; repeatable
  --noise-mm   instrument noise, mm per coordinate (1 σ; default 0.05): a residual spread
               above twice this is reported with its likely causes; the plausibility verdicts
               compare it with the same figure
  --allow-outside-limits   accept joint readings outside the model's limits
  --length-bound, --angle-bound   plausible change from nominal (mm, deg; default 5, 1)
  --tool-fixture   the tool is a fixed fixture: judge its point too

  Warnings (poor excitation, residuals above the noise) and the plausibility verdicts (the rules
  the product applies to every fit) are printed after the summary; the command exits with status 7
  when the fit is implausible (the files are still written).`;

export const CHECK_USAGE = `usage: offsetry check --model GEOMETRY.json --data SESSION.csv [--allow-outside-limits]

  Prints the 3-D error of the geometry's predicted points against the measured ones.
  When the geometry has no base frame, the measurement frame is first registered to it.`;

export const PLAN_USAGE = `usage: offsetry plan --model GEOMETRY.json --count 60 --out POSES.csv [--seed N] [--index O1|O3|O4]

  Picks --count joint configurations within the joint limits that maximise an observability
  index (default O1) for the default parameter set, and writes them as CSV (pose,q1..qn).`;

const REMOTE = `  --server     the Offsetry server (default: $OFFSETRY_URL)
  --token      a personal API token (default: $OFFSETRY_TOKEN; create one on the Account page)`;

export const UPLOAD_USAGE = `usage: offsetry upload --unit SERIAL --file SESSION.csv --measured-on YYYY-MM-DD
                      [--instrument TEXT] [--uncertainty TEXT] [--technician TEXT] [--notes TEXT]
                      [--allow-outside-limits]
                      [--server URL] [--token TOKEN]

  Uploads a measurement session of a unit to the server, which checks the whole file; its
  line/field problems are printed like offsetry check prints them, and nothing is stored.
  Files from 256 KiB on show a progress bar on stderr. --uncertainty is the instrument's stated
  uncertainty as its own certificate gives it (printed on the calibration certificate).
${REMOTE}`;

export const PULL_USAGE = `usage: offsetry pull --unit SERIAL --out FILE [--format json|csv|urdf|certificate]
                    [--server URL] [--token TOKEN]

  Downloads the unit's current approved parameter set (default --format json: the arm geometry
  file; csv: parameter table; urdf; certificate). Written only when complete and its SHA-256
  matches the server's; exits 6 when the unit has no approved set.
${REMOTE}`;

export const STATUS_USAGE = `usage: offsetry status --unit SERIAL [--json] [--server URL] [--token TOKEN]

  The unit's current parameter set version, fits queued or running, fits awaiting review and
  open drift alerts (--json: the same as JSON).
${REMOTE}`;
export const COMPENSATE_USAGE = `usage: offsetry compensate --model CALIBRATED.json --nominal NOMINAL.json --targets TARGETS.csv --out OUT.csv
                          [--frame base|measurement] [--tool x,y,z,rx,ry,rz]

  Corrects a robot program for a calibrated geometry: for every target, the joint values that bring the
  calibrated arm onto it, and the target the nominal model needs to drive to those joint values.
  --model      calibrated geometry (offsetry-arm/1 JSON, e.g. from offsetry fit)
  --nominal    the arm model's nominal geometry (the controller's model)
  --targets    program (CSV: target,x,y,z[,rx,ry,rz][,q1..qn] or target,q1..qn)
  --out        compensated program to write (CSV: target,q1..qn,x,y,z,rx,ry,rz,status,message)
  --frame      frame of the targets: base (robot base, default) or measurement (tracker frame of the fit)
  --tool       tool centre point in the flange frame (mm, deg), replacing both geometries' tools`;
