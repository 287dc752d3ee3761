pub mod cme;
