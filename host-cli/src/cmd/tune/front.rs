//! The Pareto front of (mean power, loss) and the choice of the best
//! candidate: computed once here and handed to the table, the JSON and the
//! plot.

/// A candidate's point: (mean transmit power, dBm; loss rate).
pub type Point = (f64, f64);

/// Which candidates are on the Pareto front of (power, loss), both to be
/// low: `true` for those no other candidate beats on both (at least as good
/// on both, better on one). Candidates without a point are not on it.
pub fn pareto_front(points: &[Option<Point>]) -> Vec<bool> {
    let mut order: Vec<(usize, Point)> = points
        .iter()
        .enumerate()
        .filter_map(|(k, p)| p.map(|p| (k, p)))
        .collect();
    order.sort_by(|a, b| {
        a.1 .0
            .total_cmp(&b.1 .0)
            .then(a.1 .1.total_cmp(&b.1 .1))
            .then(a.0.cmp(&b.0))
    });
    let mut on = vec![false; points.len()];
    // Walk by rising power, in groups of equal power; `lowest` is the least
    // loss at a lower power. In a group only its least loss can be on the
    // front, and only if it is below `lowest`.
    let mut lowest = f64::INFINITY;
    let mut i = 0;
    while let Some(&(_, (tx, _))) = order.get(i) {
        let group: Vec<(usize, f64)> = order
            .iter()
            .skip(i)
            .take_while(|(_, p)| p.0 == tx)
            .map(|&(k, p)| (k, p.1))
            .collect();
        i += group.len().max(1);
        let least = group.iter().map(|g| g.1).fold(f64::INFINITY, f64::min);
        if least < lowest {
            for (k, l) in &group {
                if *l == least {
                    if let Some(slot) = on.get_mut(*k) {
                        *slot = true;
                    }
                }
            }
            lowest = least;
        }
    }
    on
}

/// The candidates on the front, by rising power (then loss, then number).
pub fn front_order(points: &[Option<Point>], on: &[bool]) -> Vec<usize> {
    let mut f: Vec<(usize, Point)> = points
        .iter()
        .enumerate()
        .filter(|(k, _)| on.get(*k).copied().unwrap_or(false))
        .filter_map(|(k, p)| p.map(|p| (k, p)))
        .collect();
    f.sort_by(|a, b| {
        a.1 .0
            .total_cmp(&b.1 .0)
            .then(a.1 .1.total_cmp(&b.1 .1))
            .then(a.0.cmp(&b.0))
    });
    f.into_iter().map(|(k, _)| k).collect()
}

/// The candidate of least power among those that `keep`; ties to the lower
/// loss, then the lower index.
pub fn cheapest(points: &[Option<Point>], keep: impl Fn(usize, &Point) -> bool) -> Option<usize> {
    points
        .iter()
        .enumerate()
        .filter_map(|(k, p)| p.filter(|p| keep(k, p)).map(|p| (k, p)))
        .min_by(|a, b| {
            a.1 .0
                .total_cmp(&b.1 .0)
                .then(a.1 .1.total_cmp(&b.1 .1))
                .then(a.0.cmp(&b.0))
        })
        .map(|(k, _)| k)
}

/// The setting of the grid (candidate ≥ 1) of least power that loses no
/// more than the default (candidate 0) and meets `meets`, if it spends less
/// power than the default.
pub fn beats_default(points: &[Option<Point>], meets: impl Fn(usize) -> bool) -> Option<usize> {
    let d = points.first().copied().flatten()?;
    let k = cheapest(points, |k, p| k > 0 && p.1 <= d.1 && meets(k))?;
    let p = points.get(k).copied().flatten()?;
    (p.0 < d.0).then_some(k)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn front_is_the_non_dominated_set() {
        // (10, .05) is beaten by (8, .04); (12, .04) by (8, .04).
        let pts = [
            Some((10.0, 0.05)),
            Some((8.0, 0.04)),
            Some((12.0, 0.04)),
            Some((14.0, 0.01)),
            Some((6.0, 0.09)),
            None,
        ];
        let on = pareto_front(&pts);
        assert_eq!(on, [false, true, false, true, true, false]);
        assert_eq!(front_order(&pts, &on), [4, 1, 3]);
        // Equal points are both on the front.
        let on = pareto_front(&[Some((1.0, 0.1)), Some((1.0, 0.1))]);
        assert_eq!(on, [true, true]);
    }

    #[test]
    fn best_and_beats_default() {
        let pts = [Some((10.0, 0.02)), Some((8.0, 0.02)), Some((6.0, 0.05))];
        assert_eq!(cheapest(&pts, |_, p| p.1 <= 0.03), Some(1));
        assert_eq!(beats_default(&pts, |_| true), Some(1));
        assert_eq!(beats_default(&pts, |k| k != 1), None);
    }
}
