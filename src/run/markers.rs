//! What the run's maps show besides the field: the grid's geographic extent and one marker per
//! source and receptor of the scenario, in the form the output writers take.

use crate::grid::Grid;
use crate::output::{Extent, Marker, MarkerKind};
use crate::scenario::Scenario;

/// The outer cell edges of `grid` in metres.
pub fn extent(grid: &Grid) -> Extent {
    Extent {
        x0: grid.x0,
        x1: grid.x0 + grid.nx as f64 * grid.dx,
        y0: grid.y0,
        y1: grid.y0 + grid.ny as f64 * grid.dy,
    }
}

/// One marker per source (labelled with its name) and per receptor, sources first, in file
/// order.
pub fn markers(scn: &Scenario) -> Vec<Marker> {
    let sources = scn.model.sources.iter().map(|s| Marker {
        x: s.at.0,
        y: s.at.1,
        label: s.name.clone(),
        kind: MarkerKind::Source,
    });
    let receptors = scn.receptors.iter().map(|r| Marker {
        x: r.at.0,
        y: r.at.1,
        label: r.name.clone(),
        kind: MarkerKind::Receptor,
    });
    sources.chain(receptors).collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn extent_is_the_outer_cell_edges() {
        let g = Grid::new(40, 20, 5.0, 2.5, 1000.0, -50.0).unwrap();
        let e = extent(&g);
        // Cell (i, j) spans x0 + i dx .. x0 + (i + 1) dx (DEVELOPERS.md conventions).
        assert_eq!((e.x0, e.x1, e.y0, e.y1), (1000.0, 1200.0, -50.0, 0.0));
    }
}
