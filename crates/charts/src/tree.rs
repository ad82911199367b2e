//! A picture of one small tree (a stump, or a tree up to depth 4): boxes with the split's
//! rule or the leaf's value, "yes" to the left and "no" to the right. A bigger tree shows
//! its first levels, each cut branch as a box counting the nodes below, and a note.

use plotters::coord::Shift;
use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, Pos, VPos};

use crate::{
    begin, fail, fit_text, footnote, message, wrap, Drawn, Look, Table, GRID, INK, MUTED, PALETTE,
};

/// One node of the tree; the root is the first. A split has both children, a leaf neither.
#[derive(Debug, Clone, PartialEq)]
pub struct TreeNode {
    /// The split's predictor; empty for a leaf.
    pub feature: String,
    /// The rule after the predictor's name, e.g. "< 63.5" or "in {a, b} or missing";
    /// records meeting it go left ("yes").
    pub threshold: String,
    pub left: Option<usize>,
    pub right: Option<usize>,
    /// The node's value in words, e.g. "risk 0.23 · 140 rows".
    pub value: String,
}

/// What the tree picture shows.
#[derive(Debug, Clone, PartialEq)]
pub struct TreeChart {
    /// Drawn above the chart; empty for none.
    pub title: String,
    pub nodes: Vec<TreeNode>,
}

/// The deepest level drawn (the root is level 0).
pub const DRAWN_DEPTH: usize = 4;

/// Each node's depth (None when not reached from the root), or why the list is not a tree.
fn depths(nodes: &[TreeNode]) -> Result<Vec<Option<usize>>, String> {
    if nodes.is_empty() {
        return Err("No tree to draw: it has no nodes.".into());
    }
    let mut depth = vec![None; nodes.len()];
    depth[0] = Some(0);
    let mut stack = vec![0usize];
    while let Some(i) = stack.pop() {
        let d = depth[i].unwrap_or(0);
        match (nodes[i].left, nodes[i].right) {
            (None, None) => {}
            (Some(l), Some(r)) => {
                for child in [l, r] {
                    if child >= nodes.len() {
                        return Err(format!(
                            "No tree to draw: node {i} points to node {child}, and there are only {}.",
                            nodes.len()
                        ));
                    }
                    if depth[child].is_some() {
                        return Err(format!(
                            "No tree to draw: node {child} is reached twice, so this is not a tree."
                        ));
                    }
                    depth[child] = Some(d + 1);
                    stack.push(child);
                }
            }
            _ => {
                return Err(format!(
                    "No tree to draw: node {i} has one child; a split needs two."
                ))
            }
        }
    }
    Ok(depth)
}

fn children(node: &TreeNode) -> Option<(usize, usize)> {
    node.left.zip(node.right)
}

/// Nodes below `i` (not counting it).
fn below(nodes: &[TreeNode], i: usize) -> usize {
    let mut count = 0;
    let mut stack = vec![i];
    while let Some(j) = stack.pop() {
        if let Some((l, r)) = children(&nodes[j]) {
            count += 2;
            stack.extend([l, r]);
        }
    }
    count
}

/// Boxes in the last row when the picture stops at level `cut`.
fn slots(nodes: &[TreeNode], depth: &[Option<usize>], cut: usize) -> usize {
    (0..nodes.len())
        .filter(|&i| match depth[i] {
            Some(d) if d < cut => children(&nodes[i]).is_none(),
            Some(d) => d == cut,
            None => false,
        })
        .count()
}

/// One box to draw: node, level, horizontal position in slots, and whether its branch is cut.
struct Placed {
    node: usize,
    level: usize,
    x: f64,
    cut: bool,
}

/// Places the boxes: the last-row boxes left to right one slot each, a parent midway over
/// its children.
fn place(nodes: &[TreeNode], cut: usize) -> Vec<Placed> {
    fn walk(
        nodes: &[TreeNode],
        i: usize,
        level: usize,
        cut: usize,
        next: &mut f64,
        out: &mut Vec<Placed>,
    ) -> f64 {
        match children(&nodes[i]) {
            Some((l, r)) if level < cut => {
                let a = walk(nodes, l, level + 1, cut, next, out);
                let b = walk(nodes, r, level + 1, cut, next, out);
                let x = (a + b) / 2.0;
                out.push(Placed {
                    node: i,
                    level,
                    x,
                    cut: false,
                });
                x
            }
            kids => {
                let x = *next;
                *next += 1.0;
                out.push(Placed {
                    node: i,
                    level,
                    x,
                    cut: kids.is_some(),
                });
                x
            }
        }
    }
    let mut out = Vec::new();
    walk(nodes, 0, 0, cut, &mut 0.0, &mut out);
    out
}

/// Draws the tree; `scale` is the device pixel ratio. Levels are drawn down to
/// [`DRAWN_DEPTH`] or fewer, as many as leave each box of the last row 70 CSS pixels.
pub fn draw_tree<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    chart: &TreeChart,
    scale: f64,
) -> Drawn {
    let look = Look::new(scale);
    let area = begin(area, &chart.title, &look)?;
    let depth = match depths(&chart.nodes) {
        Ok(d) => d,
        Err(why) => return message(&area, &why, &look),
    };
    let nodes = &chart.nodes;
    let deepest = depth.iter().flatten().copied().max().unwrap_or(0);
    let reached = depth.iter().flatten().count();
    let (w, _) = area.dim_in_pixel();
    let usable = w as i32 - look.px(24.0);
    let cut = (1..=deepest.min(DRAWN_DEPTH))
        .rev()
        .find(|&c| slots(nodes, &depth, c) as i32 * look.px(70.0) <= usable)
        .unwrap_or(deepest.min(1));
    let area = if cut < deepest {
        let note = format!(
            "Levels 0–{cut} of a tree {deepest} levels deep with {reached} nodes; \
             a grey box counts the nodes below it. The table lists every node."
        );
        footnote(&area, &note, &look)?
    } else {
        area
    };
    let placed = place(nodes, cut);
    // Slots are numbered 0, 1, ... in the last row; the last box has the largest.
    let count = placed.iter().map(|p| p.x as usize + 1).max().unwrap_or(1);
    let (w, h) = area.dim_in_pixel();
    let slot = (w as i32 - look.px(24.0)) / count as i32;
    let row = ((h as i32 - look.px(16.0)) / (cut as i32 + 1)).clamp(look.px(44.0), look.px(100.0));
    let box_h = look.px(38.0).min(row - look.px(14.0)).max(look.px(20.0));
    let centre = |p: &Placed| {
        (
            look.px(12.0) + (p.x * slot as f64) as i32 + slot / 2,
            look.px(8.0) + p.level as i32 * row,
        )
    };
    let at: std::collections::HashMap<usize, (i32, i32)> =
        placed.iter().map(|p| (p.node, centre(p))).collect();
    let small = TextStyle::from(look.font(11.0)).color(&MUTED);
    let main = look.text(12.0);
    // Links first, so the boxes sit on top of them.
    for p in placed.iter().filter(|p| !p.cut && p.level < cut) {
        let Some((l, r)) = children(&nodes[p.node]) else {
            continue;
        };
        let (x, y) = at[&p.node];
        for (child, word, side, gap) in [(l, "yes", HPos::Right, -4.0), (r, "no", HPos::Left, 4.0)]
        {
            let (cx, cy) = at[&child];
            area.draw(&PathElement::new(
                vec![(x, y + box_h), (cx, cy)],
                look.line(GRID, 1.5),
            ))
            .map_err(fail)?;
            area.draw(&Text::new(
                word,
                ((x + cx) / 2 + look.px(gap), (y + box_h + cy) / 2),
                small.clone().pos(Pos::new(side, VPos::Center)),
            ))
            .map_err(fail)?;
        }
    }
    let leaf = crate::rgb(PALETTE[0]).mix(0.18);
    let cut_fill = RGBColor(236, 233, 225);
    let pad = look.px(6.0);
    for p in &placed {
        let node = &nodes[p.node];
        let (x, y) = at[&p.node];
        let (line1, line2, fill) = if p.cut {
            (
                format!("… {} more nodes", below(nodes, p.node)),
                String::new(),
                cut_fill.filled(),
            )
        } else if children(node).is_some() {
            (
                format!("{} {}", node.feature, node.threshold),
                node.value.clone(),
                WHITE.filled(),
            )
        } else {
            (node.value.clone(), String::new(), leaf.filled())
        };
        let room = slot - look.px(8.0);
        // A box with one text wraps it onto its second line when it is too wide.
        let (line1, line2) = if line2.is_empty() {
            let parts = wrap(&area, &line1, &main, room - 2 * pad);
            let rest = parts.get(1..).map_or(String::new(), |p| p.join(" "));
            (parts.first().cloned().unwrap_or_default(), rest)
        } else {
            (line1, line2)
        };
        let line1 = fit_text(&area, &line1, &main, room - 2 * pad);
        let line2 = fit_text(&area, &line2, &small, room - 2 * pad);
        let wide =
            crate::text_width(&area, &line1, &main).max(crate::text_width(&area, &line2, &small));
        let half = ((wide + 2 * pad) / 2).min(room / 2).max(look.px(12.0));
        let corners = [(x - half, y), (x + half, y + box_h)];
        area.draw(&Rectangle::new(corners, fill)).map_err(fail)?;
        area.draw(&Rectangle::new(
            corners,
            look.line(if p.cut { GRID } else { INK }, 1.0),
        ))
        .map_err(fail)?;
        let lines = if line2.is_empty() {
            vec![(line1, &main)]
        } else {
            vec![(line1, &main), (line2, &small)]
        };
        let step = box_h / (lines.len() as i32 + 1);
        for (k, (text, style)) in lines.into_iter().enumerate() {
            area.draw(&Text::new(
                text,
                (x, y + step * (k as i32 + 1)),
                style.clone().pos(Pos::new(HPos::Center, VPos::Center)),
            ))
            .map_err(fail)?;
        }
    }
    area.present().map_err(fail)
}

/// The tree's numbers: every node in index order with its level (— when not reached from
/// the root), its rule or "leaf", its value, and where "yes" and "no" go.
pub fn tree_table(chart: &TreeChart) -> Table {
    let depth = depths(&chart.nodes).unwrap_or_else(|_| vec![None; chart.nodes.len()]);
    let rows = chart
        .nodes
        .iter()
        .enumerate()
        .map(|(i, n)| {
            let to = |c: Option<usize>| c.map_or("—".into(), |c| format!("node {c}"));
            let rule = if n.left.is_some() || n.right.is_some() {
                format!("{} {}", n.feature, n.threshold)
            } else {
                "leaf".into()
            };
            vec![
                format!("node {i}"),
                depth[i].map_or("—".into(), |d| d.to_string()),
                rule,
                n.value.clone(),
                to(n.left),
                to(n.right),
            ]
        })
        .collect();
    Table {
        caption: "The tree, node by node (yes goes left)".into(),
        columns: ["node", "level", "rule", "value", "yes", "no"]
            .map(String::from)
            .to_vec(),
        rows,
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::testing::{svg, texts};

    fn split(feature: &str, threshold: &str, left: usize, right: usize, value: &str) -> TreeNode {
        TreeNode {
            feature: feature.into(),
            threshold: threshold.into(),
            left: Some(left),
            right: Some(right),
            value: value.into(),
        }
    }
    fn leaf(value: &str) -> TreeNode {
        TreeNode {
            feature: String::new(),
            threshold: String::new(),
            left: None,
            right: None,
            value: value.into(),
        }
    }

    /// A full tree of `depth` levels below the root, nodes in breadth-first order.
    fn full(depth: u32) -> Vec<TreeNode> {
        let n = (1usize << (depth + 1)) - 1;
        (0..n)
            .map(|i| {
                if 2 * i + 2 < n {
                    split(
                        &format!("x{i}"),
                        "< 1.5",
                        2 * i + 1,
                        2 * i + 2,
                        &format!("risk 0.{i}"),
                    )
                } else {
                    leaf(&format!("risk {i}"))
                }
            })
            .collect()
    }

    fn boxes(svg: &str) -> usize {
        // Each box is a filled rectangle and its outline; count the outlines (stroke, no fill).
        svg.split("<rect")
            .skip(1)
            .filter(|r| r.split("/>").next().unwrap_or("").contains("fill=\"none\""))
            .count()
    }

    #[test]
    fn a_stump_is_three_boxes_with_its_rule_and_values() {
        let chart = TreeChart {
            title: "Tree 1 of the forest".into(),
            nodes: vec![
                split("age", "< 63.5", 1, 2, "risk 0.20 · 500 rows"),
                leaf("risk 0.08 · 300 rows"),
                leaf("risk 0.38 · 200 rows"),
            ],
        };
        let out = svg("tree-stump", (600, 400), 1.0, |a, s| {
            draw_tree(a, &chart, s)
        });
        let drawn = texts(&out);
        for text in [
            "Tree 1 of the forest",
            "age < 63.5",
            "risk 0.20 · 500 rows",
            "risk 0.08 · 300 rows",
            "risk 0.38 · 200 rows",
            "yes",
            "no",
        ] {
            assert!(drawn.iter().any(|t| t == text), "no '{text}' in {drawn:?}");
        }
        assert_eq!(boxes(&out), 3);
        // Yes (the left leaf) is drawn left of no.
        let x_of = |t: &str| {
            out.split("<text")
                .find(|s| s.contains(&format!(">\n{t}\n")) || s.contains(&format!(">{t}<")))
                .and_then(|s| {
                    s.split("x=\"")
                        .nth(1)?
                        .split('"')
                        .next()?
                        .parse::<i32>()
                        .ok()
                })
                .unwrap()
        };
        assert!(x_of("risk 0.08 · 300 rows") < x_of("risk 0.38 · 200 rows"));
        assert!(!out.contains("Levels 0–"), "a stump needs no note");
    }

    #[test]
    fn a_depth_three_tree_is_drawn_whole_and_a_deeper_one_cut_with_a_note() {
        let three = TreeChart {
            title: String::new(),
            nodes: full(3),
        };
        let out = svg("tree-3", (600, 400), 1.0, |a, s| draw_tree(a, &three, s));
        assert_eq!(boxes(&out), 15);
        assert!(!out.contains("Levels 0–"));
        // Depth 6 at 600 pixels: 8 boxes of 70 pixels fit in the last row, not 16, so the
        // picture stops at level 3, each cut branch counting its 14 nodes below.
        let six = TreeChart {
            title: String::new(),
            nodes: full(6),
        };
        let out = svg("tree-6", (600, 400), 1.0, |a, s| draw_tree(a, &six, s));
        assert_eq!(boxes(&out), 15);
        assert!(
            out.contains("Levels 0–3 of a tree 6 levels deep with 127 nodes"),
            "{:?}",
            texts(&out)
        );
        // Wider, the same tree shows one level more, each cut branch two levels (6 nodes).
        let wide = svg("tree-6-wide", (1400, 500), 1.0, |a, s| {
            draw_tree(a, &six, s)
        });
        assert!(boxes(&wide) > boxes(&out));
        assert!(texts(&wide).iter().any(|t| t.starts_with("… 6 more")));
        assert_eq!(tree_table(&six).rows.len(), 127);
    }

    #[test]
    fn broken_node_lists_give_a_message() {
        let cases = [
            (vec![], "it has no nodes"),
            (
                vec![split("a", "< 1", 1, 5, ""), leaf("x")],
                "points to node 5",
            ),
            (
                vec![split("a", "< 1", 1, 1, ""), leaf("x")],
                "reached twice",
            ),
            (
                vec![split("a", "< 1", 0, 1, ""), leaf("x")],
                "reached twice",
            ),
            (
                vec![
                    TreeNode {
                        left: Some(1),
                        right: None,
                        ..leaf("x")
                    },
                    leaf("y"),
                ],
                "has one child",
            ),
        ];
        for (nodes, why) in cases {
            let chart = TreeChart {
                title: String::new(),
                nodes,
            };
            let out = svg("tree-broken", (600, 400), 1.0, |a, s| {
                draw_tree(a, &chart, s)
            });
            assert!(out.contains(why), "{why}: {:?}", texts(&out));
            let table = tree_table(&chart);
            assert_eq!(table.rows.len(), chart.nodes.len());
        }
        // A single leaf is a tree: one box.
        let one = TreeChart {
            title: String::new(),
            nodes: vec![leaf("risk 0.2")],
        };
        assert_eq!(
            boxes(&svg("tree-leaf", (600, 400), 1.0, |a, s| draw_tree(
                a, &one, s
            ))),
            1
        );
    }
}
