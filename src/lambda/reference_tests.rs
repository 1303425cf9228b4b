//! Lambda rules against closed-form ridge references (filled in separately).
