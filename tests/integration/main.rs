//! End-to-end tests of the `plinth` binary on small fixture portfolios, one module per topic.

mod demo;
mod explorer;
mod fixture;
mod foundation;
mod gis_formats;
mod limits;
mod metrics;
mod output_safety;
mod reports;
mod review;
mod series;
mod sharding;
mod verdict;
mod works;
