pub mod figures;
