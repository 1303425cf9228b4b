//! Integration tests: the `taumap` binary run in fresh temporary directories.

#[path = "cli/util.rs"]
mod util;

#[path = "cli/developers.rs"]
mod developers;
#[path = "cli/errors.rs"]
mod errors;
#[path = "cli/errors_doc.rs"]
mod errors_doc;
#[path = "cli/invert.rs"]
mod invert;
#[path = "cli/kk.rs"]
mod kk;
#[path = "cli/model.rs"]
mod model;
#[path = "cli/model_text.rs"]
mod model_text;
#[path = "cli/plots.rs"]
mod plots;
#[path = "cli/readers.rs"]
mod readers;
#[path = "cli/readme.rs"]
mod readme;
#[path = "cli/track.rs"]
mod track;
#[path = "cli/transient.rs"]
mod transient;
