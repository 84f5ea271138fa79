//! The string codes of the API as enum schemas, so the document lists every value a field
//! takes. They describe codes stored and compared elsewhere (`src/db`, `src/reduction`,
//! `src/auth`); here they are documentation only, used through `#[schema(value_type = …)]`.
#![allow(dead_code)]

use serde::Deserialize;
use utoipa::ToSchema;

/// Declares a documentation enum whose variants serialise as the given codes.
macro_rules! codes {
    ($(#[$doc:meta])* $name:ident { $($variant:ident = $code:tt),+ $(,)? }) => {
        $(#[$doc])*
        #[derive(Deserialize, ToSchema)]
        pub enum $name {
            $(#[serde(rename = $code)] $variant),+
        }
    };
}

codes!(
    /// Unit system a project shows its numbers in (the API is always SI).
    UnitSystem { Si = "si", Us = "us" }
);
codes!(
    /// How a project writes chainage on its pages.
    ChainageStyle { KmMetre = "km_metre", FeetStation = "feet_station" }
);
codes!(
    /// A lab compaction effort: a standard preset, or `custom` with `custom_effort`.
    Effort {
        AstmD698In4 = "astm_d698_4in",
        AstmD698In6 = "astm_d698_6in",
        AstmD1557In4 = "astm_d1557_4in",
        AstmD1557In6 = "astm_d1557_6in",
        AashtoT99 = "aashto_t99",
        AashtoT180 = "aashto_t180",
        Bs1377Light = "bs1377_light",
        Bs1377Heavy = "bs1377_heavy",
        Is2720Light = "is2720_light",
        Is2720Heavy = "is2720_heavy",
        Custom = "custom",
    }
);
codes!(
    /// The effort a clause asks for: a preset, `custom`, or `any` (no effort required).
    ClauseEffort {
        AstmD698In4 = "astm_d698_4in",
        AstmD698In6 = "astm_d698_6in",
        AstmD1557In4 = "astm_d1557_4in",
        AstmD1557In6 = "astm_d1557_6in",
        AashtoT99 = "aashto_t99",
        AashtoT180 = "aashto_t180",
        Bs1377Light = "bs1377_light",
        Bs1377Heavy = "bs1377_heavy",
        Is2720Light = "is2720_light",
        Is2720Heavy = "is2720_heavy",
        Custom = "custom",
        Any = "any",
    }
);
codes!(
    /// The family of a lab test's effort.
    EffortFamily { Standard = "standard", Modified = "modified" }
);
codes!(
    /// Lot acceptance rule.
    Rule { EveryTest = "every_test", MeanAndMin = "mean_and_min", QualityIndex = "quality_index" }
);
codes!(
    /// How a clause's moisture window is written.
    MoistureBasis { PointsOfOmc = "points_of_omc", PercentOfOmc = "percent_of_omc", Absolute = "absolute" }
);
codes!(
    /// How moisture is judged.
    MoistureJudgement { PerTest = "per_test", Pwl = "pwl" }
);
codes!(
    /// How a value is compared with its limit.
    Rounding { AstmE29 = "astm_e29", Absolute = "absolute" }
);
codes!(
    /// Kind of a registered instrument.
    InstrumentKind {
        NuclearGauge = "nuclear_gauge",
        SandCone = "sand_cone",
        SandBatch = "sand_batch",
        Balloon = "balloon",
        DriveCylinder = "drive_cylinder",
    }
);
codes!(
    /// Kind of an instrument's dated record.
    RecordKind { Calibration = "calibration", LeakTest = "leak_test", Licence = "licence" }
);
codes!(
    /// Nuclear gauge mode.
    GaugeMode { DirectTransmission = "direct_transmission", Backscatter = "backscatter" }
);
codes!(
    /// A role in a project.
    Role { Technician = "technician", QcManager = "qc_manager", ClientEngineer = "client_engineer", Viewer = "viewer" }
);
codes!(
    /// A lot's stored state.
    LotState { Open = "open", Submitted = "submitted", Accepted = "accepted", Rejected = "rejected" }
);
codes!(
    /// The state a reader sees.
    DisplayState {
        Open = "open",
        OwedTests = "owed_tests",
        Failing = "failing",
        Submitted = "submitted",
        Accepted = "accepted",
        Rejected = "rejected",
        Certified = "certified",
    }
);
codes!(
    /// How a test stands in its lot.
    Standing {
        Counted = "counted",
        Voided = "voided",
        Superseded = "superseded",
        CannotBeJudged = "cannot_be_judged",
        EarlierSample = "earlier_sample",
    }
);
codes!(
    /// A test's result in one word.
    TestResult {
        Pass = "pass",
        Fail = "fail",
        Void = "void",
        Superseded = "superseded",
        Unjudged = "unjudged",
        Resampled = "resampled",
    }
);
codes!(
    /// A field density method.
    Method { Nuclear = "nuclear", SandCone = "sand_cone", Balloon = "balloon", DriveCylinder = "drive_cylinder" }
);
codes!(
    /// Where a test's water content came from.
    MoistureSource { Gauge = "gauge", Oven = "oven", Entered = "entered" }
);
codes!(
    /// What an export holds.
    ExportKind {
        TestsCsv = "tests_csv",
        TestsJson = "tests_json",
        LotsCsv = "lots_csv",
        LotsJson = "lots_json",
        TestsGeojson = "tests_geojson",
    }
);
codes!(
    /// How control-chart points are grouped.
    GroupBy { Source = "source", Layer = "layer", Technician = "technician" }
);
codes!(
    /// What a control chart plots: relative compaction (%) or moisture deviation (points).
    Measure { Rc = "rc", Moisture = "moisture" }
);
codes!(
    /// Whether a test's instrument was in check on its date.
    InstrumentCheck { NotRecorded = "not_recorded", InCheck = "in_check", OutOfCheck = "out_of_check" }
);
codes!(
    /// Whether a curve needs a QC manager's written approval before it may be a reference.
    Approval { NotNeeded = "not_needed", NeedsApproval = "needs_approval", Approved = "approved" }
);
codes!(
    /// A lab test's status.
    LabStatus { Active = "active", Superseded = "superseded" }
);
