//! Wording every view shows where the work can hurt someone or a result can be misread: the
//! window, the terminal and the written report share it.

/// Safety and scope cautions, shown at first start and in the help.
pub const CAUTIONS: [&str; 5] = [
    "Test only machinery that is stopped, isolated and locked out under your site's procedure; \
     never tap a running or energised machine.",
    "Wear eye protection: hammer tips and small parts can fly. Keep fingers and bystanders clear \
     of the swing; secure a suspended part against swinging or falling; tie down cables.",
    "Do not strike sensors or cables, respect the accelerometer's shock limit, and turn off \
     phantom power on inputs wired to IEPE conditioners.",
    "Results are advisory. Natural frequencies, damping and any running-speed margin must be \
     judged against the applicable standard and by a competent, licensed engineer; they do not \
     replace local codes or licensed practice.",
    "Bench results (free or on test supports) differ from the installed machine: bearings, \
     couplings, fluid and temperature shift the frequencies.",
];

/// What the map leaves out, shown beside it.
pub const MAP_NOTE: &str = "Undamped critical speeds of a non-rotating Timoshenko model: no \
     gyroscopic effect (disc polar inertia unused, so forward and backward whirl are not split), \
     isotropic bearings as plain springs without damping, pedestal or foundation mass.";

/// Advisory wording of the margin check.
pub const MARGIN_NOTE: &str = "Advisory only. API RP 684 rule (verify against your edition, or \
     use the standard that applies to this machine). Bench \
     frequencies are not installed critical speeds. Decisions on running speeds belong to the \
     applicable standard, local codes and a competent, licensed engineer.";

/// What the rotor-at-speed results rest on, shown beside them.
pub const ROTOR: &str = "Advisory: a linearised rotor model — bearings as eight speed-dependent \
     coefficients about the static equilibrium, no foundation or pedestal flexibility, no seals, \
     no material damping unless given. Confirm critical speeds by a run-up or coast-down before \
     relying on them; decisions on running speeds belong to the applicable standard (e.g. the API \
     RP 684 rule — verify against your edition), local codes and a competent, licensed engineer.";

/// What recording and reading a run-up or coast-down asks of the person.
pub const RUN: &str = "Advisory. Recording a run means a machine turning: guards on, stay clear of \
     rotating parts and follow the site's procedure.";

/// What a test plan rests on.
pub const PLAN: &str = "A plan from a model: the real part's modes differ (geometry, fits, \
     supports), so confirm the band and the node positions with a first tap at a few points. \
     Tap only a part that is stopped, isolated and locked out; wear eye protection.";
