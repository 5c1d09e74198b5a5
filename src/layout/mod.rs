//! A small layout engine: pages, wrapped paragraphs, tables with repeated
//! headers and unsplit rows, decimal-aligned numbers. Positions are in
//! points from the page's top-left corner; nothing here knows what is laid
//! out, and nothing here writes a file.

#[cfg(test)]
mod tests;

pub type Rgb = (f32, f32, f32);

pub const BLACK: Rgb = (0.0, 0.0, 0.0);
pub const GREY: Rgb = (0.45, 0.45, 0.45);
pub const LIGHT: Rgb = (0.85, 0.85, 0.85);

#[derive(Debug, Clone, PartialEq)]
pub enum Item {
    /// `y` is the baseline.
    Text {
        x: f32,
        y: f32,
        text: String,
        size: f32,
        bold: bool,
        color: Rgb,
    },
    Line {
        x1: f32,
        y1: f32,
        x2: f32,
        y2: f32,
        width: f32,
        color: Rgb,
    },
    /// Filled; `y` is the top edge.
    Rect {
        x: f32,
        y: f32,
        w: f32,
        h: f32,
        color: Rgb,
    },
}

impl Item {
    pub fn moved(&self, dx: f32, dy: f32) -> Item {
        match self.clone() {
            Item::Text {
                x,
                y,
                text,
                size,
                bold,
                color,
            } => Item::Text {
                x: x + dx,
                y: y + dy,
                text,
                size,
                bold,
                color,
            },
            Item::Line {
                x1,
                y1,
                x2,
                y2,
                width,
                color,
            } => Item::Line {
                x1: x1 + dx,
                y1: y1 + dy,
                x2: x2 + dx,
                y2: y2 + dy,
                width,
                color,
            },
            Item::Rect { x, y, w, h, color } => Item::Rect {
                x: x + dx,
                y: y + dy,
                w,
                h,
                color,
            },
        }
    }
}

#[derive(Debug, Clone, PartialEq)]
pub struct Page {
    pub width: f32,
    pub height: f32,
    pub items: Vec<Item>,
}

/// Text measurement: the sum of glyph advances (no kerning is applied when
/// the text is drawn, so none is measured).
pub trait Measure {
    fn width(&self, text: &str, size: f32, bold: bool) -> f32;
}

#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Style {
    pub size: f32,
    pub bold: bool,
    pub color: Rgb,
}

impl Style {
    pub const fn new(size: f32) -> Style {
        Style {
            size,
            bold: false,
            color: BLACK,
        }
    }

    pub const fn bold(self) -> Style {
        Style { bold: true, ..self }
    }

    pub const fn color(self, color: Rgb) -> Style {
        Style { color, ..self }
    }

    pub fn line_height(&self) -> f32 {
        self.size * 1.25
    }
}

/// Breaks `text` into lines no wider than `max`, at spaces where it can and
/// inside a word only when the word alone is too wide.
pub fn wrap(m: &dyn Measure, text: &str, style: Style, max: f32) -> Vec<String> {
    let mut lines = Vec::new();
    for para in text.split('\n') {
        let mut line = String::new();
        for word in para.split_whitespace() {
            let candidate = if line.is_empty() {
                word.to_string()
            } else {
                format!("{line} {word}")
            };
            if m.width(&candidate, style.size, style.bold) <= max {
                line = candidate;
                continue;
            }
            if !line.is_empty() {
                lines.push(std::mem::take(&mut line));
            }
            if m.width(word, style.size, style.bold) <= max {
                line = word.to_string();
            } else {
                // A word wider than the column: break it between characters.
                for ch in word.chars() {
                    let mut next = line.clone();
                    next.push(ch);
                    if !line.is_empty() && m.width(&next, style.size, style.bold) > max {
                        lines.push(std::mem::take(&mut line));
                        line.push(ch);
                    } else {
                        line = next;
                    }
                }
            }
        }
        lines.push(line);
    }
    if lines.is_empty() {
        lines.push(String::new());
    }
    lines
}

#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Align {
    Left,
    Right,
    /// Right-aligned on the decimal point across the column.
    Decimal,
}

#[derive(Debug, Clone)]
pub struct Column {
    pub title: String,
    pub width: f32,
    pub align: Align,
}

#[derive(Debug, Clone)]
pub enum Cell {
    Text(String),
    Bold(String),
    /// Items relative to the cell's top-left corner, and their height.
    Graphic(Vec<Item>, f32),
}

#[derive(Debug, Clone)]
pub struct Row {
    pub cells: Vec<Cell>,
    /// A rule above the row, as between groups.
    pub rule_above: bool,
}

#[derive(Debug, Clone)]
pub struct Table {
    pub columns: Vec<Column>,
    /// False for a plain two-column list with no heading row.
    pub show_header: bool,
    pub header: Style,
    pub body: Style,
    pub rows: Vec<Row>,
}

pub const CELL_PAD: f32 = 2.5;

/// The x of the decimal point for a decimal column: right edge less the
/// widest fraction (the point and what follows it).
fn split_decimal(text: &str) -> (&str, &str) {
    match text.rfind('.') {
        Some(i) if text[i + 1..].chars().all(|c| c.is_ascii_digit()) => (&text[..i], &text[i..]),
        _ => (text, ""),
    }
}

#[derive(Debug, Clone, Copy)]
pub struct Margins {
    pub top: f32,
    pub right: f32,
    pub bottom: f32,
    pub left: f32,
}

/// Lays blocks down the page, starting new pages as they fill.
pub struct Flow<'m> {
    m: &'m dyn Measure,
    pub width: f32,
    pub height: f32,
    pub margins: Margins,
    pub pages: Vec<Page>,
    /// Cursor, from the top of the current page.
    pub y: f32,
}

impl<'m> Flow<'m> {
    pub fn new(m: &'m dyn Measure, width: f32, height: f32, margins: Margins) -> Flow<'m> {
        let mut f = Flow {
            m,
            width,
            height,
            margins,
            pages: Vec::new(),
            y: 0.0,
        };
        f.new_page();
        f
    }

    pub fn measure(&self) -> &'m dyn Measure {
        self.m
    }

    pub fn content_width(&self) -> f32 {
        self.width - self.margins.left - self.margins.right
    }

    pub fn bottom(&self) -> f32 {
        self.height - self.margins.bottom
    }

    pub fn new_page(&mut self) {
        self.pages.push(Page {
            width: self.width,
            height: self.height,
            items: Vec::new(),
        });
        self.y = self.margins.top;
    }

    fn page(&mut self) -> &mut Page {
        // There is always a page: new() starts one.
        let last = self.pages.len() - 1;
        &mut self.pages[last]
    }

    /// Starts a new page unless `h` more points fit on this one.
    pub fn ensure(&mut self, h: f32) -> bool {
        if self.y + h > self.bottom() && self.y > self.margins.top {
            self.new_page();
            return true;
        }
        false
    }

    pub fn space(&mut self, h: f32) {
        self.y += h;
    }

    pub fn push(&mut self, item: Item) {
        self.page().items.push(item);
    }

    pub fn text_at(&mut self, x: f32, baseline: f32, text: &str, style: Style) {
        self.push(Item::Text {
            x,
            y: baseline,
            text: text.to_string(),
            size: style.size,
            bold: style.bold,
            color: style.color,
        });
    }

    /// A wrapped paragraph; it may break across pages between lines.
    pub fn paragraph(&mut self, text: &str, style: Style, indent: f32) {
        let max = self.content_width() - indent;
        for line in wrap(self.m, text, style, max) {
            self.ensure(style.line_height());
            let baseline = self.y + style.size;
            let x = self.margins.left + indent;
            self.text_at(x, baseline, &line, style);
            self.y += style.line_height();
        }
    }

    /// A block of `h` points that must not be split: `draw` gets the block's
    /// top-left corner.
    pub fn block(&mut self, h: f32, draw: impl FnOnce(&mut Vec<Item>, f32, f32)) {
        self.ensure(h);
        let (x, y) = (self.margins.left, self.y);
        let mut items = Vec::new();
        draw(&mut items, x, y);
        self.page().items.extend(items);
        self.y += h;
    }

    fn cell_lines(&self, table: &Table, col: usize, cell: &Cell) -> Vec<String> {
        let inner = table.columns[col].width - 2.0 * CELL_PAD;
        match cell {
            Cell::Text(t) => wrap(self.m, t, table.body, inner),
            Cell::Bold(t) => wrap(self.m, t, table.body.bold(), inner),
            Cell::Graphic(..) => Vec::new(),
        }
    }

    fn draw_header(&mut self, table: &Table, decimal_x: &[f32]) -> f32 {
        if !table.show_header {
            return 0.0;
        }
        let lh = table.header.line_height();
        let heights: Vec<Vec<String>> = table
            .columns
            .iter()
            .map(|c| wrap(self.m, &c.title, table.header, c.width - 2.0 * CELL_PAD))
            .collect();
        let lines = heights.iter().map(Vec::len).max().unwrap_or(1);
        let h = lines as f32 * lh + 2.0 * CELL_PAD;
        let top = self.y;
        let mut x = self.margins.left;
        let total: f32 = table.columns.iter().map(|c| c.width).sum();
        self.push(Item::Rect {
            x,
            y: top,
            w: total,
            h,
            color: (0.92, 0.93, 0.95),
        });
        for (i, col) in table.columns.iter().enumerate() {
            for (k, line) in heights[i].iter().enumerate() {
                let w = self.m.width(line, table.header.size, table.header.bold);
                let lx = match col.align {
                    Align::Left => x + CELL_PAD,
                    Align::Right => x + col.width - CELL_PAD - w,
                    Align::Decimal => (decimal_x[i] - w)
                        .max(x + CELL_PAD)
                        .min(x + col.width - CELL_PAD - w),
                };
                let baseline = top + CELL_PAD + k as f32 * lh + table.header.size;
                self.text_at(lx, baseline, line, table.header);
            }
            x += col.width;
        }
        self.push(Item::Line {
            x1: self.margins.left,
            y1: top + h,
            x2: self.margins.left + total,
            y2: top + h,
            width: 0.6,
            color: BLACK,
        });
        self.y = top + h;
        h
    }

    /// Lays a table out; its header repeats at the top of every page it
    /// reaches, and no row is split across pages.
    // Long (about 95 lines) on purpose: measuring, paginating and drawing
    // share the column geometry and the header height; split, each part
    // would need all of it passed in.
    pub fn table(&mut self, table: &Table) {
        let ncol = table.columns.len();
        // The decimal point's x in each decimal column, relative to the page.
        let mut decimal_x = vec![0.0f32; ncol];
        let mut x = self.margins.left;
        for (i, col) in table.columns.iter().enumerate() {
            if col.align == Align::Decimal {
                let frac = table
                    .rows
                    .iter()
                    .filter_map(|r| match r.cells.get(i) {
                        Some(Cell::Text(t)) | Some(Cell::Bold(t)) => Some(t),
                        _ => None,
                    })
                    .map(|t| self.m.width(split_decimal(t).1, table.body.size, false))
                    .fold(0.0f32, f32::max);
                decimal_x[i] = x + col.width - CELL_PAD - frac;
            }
            x += col.width;
        }
        let lh = table.body.line_height();
        let header_h = if !table.show_header {
            0.0
        } else {
            let lines = table
                .columns
                .iter()
                .map(|c| wrap(self.m, &c.title, table.header, c.width - 2.0 * CELL_PAD).len())
                .max()
                .unwrap_or(1);
            lines as f32 * table.header.line_height() + 2.0 * CELL_PAD
        };
        let first_row_h = table
            .rows
            .first()
            .map(|r| self.row_height(table, r, lh))
            .unwrap_or(0.0);
        // Keep the header with at least the first row.
        self.ensure(header_h + first_row_h);
        self.draw_header(table, &decimal_x);
        let total: f32 = table.columns.iter().map(|c| c.width).sum();
        for row in &table.rows {
            let h = self.row_height(table, row, lh);
            if self.y + h > self.bottom() {
                self.new_page();
                self.draw_header(table, &decimal_x);
            }
            let top = self.y;
            if row.rule_above {
                self.push(Item::Line {
                    x1: self.margins.left,
                    y1: top,
                    x2: self.margins.left + total,
                    y2: top,
                    width: 0.3,
                    color: LIGHT,
                });
            }
            let mut x = self.margins.left;
            for (i, col) in table.columns.iter().enumerate() {
                let Some(cell) = row.cells.get(i) else {
                    x += col.width;
                    continue;
                };
                match cell {
                    Cell::Graphic(items, _) => {
                        for it in items {
                            self.push(it.moved(x + CELL_PAD, top + CELL_PAD));
                        }
                    }
                    Cell::Text(_) | Cell::Bold(_) => {
                        let style = if matches!(cell, Cell::Bold(_)) {
                            table.body.bold()
                        } else {
                            table.body
                        };
                        for (k, line) in self.cell_lines(table, i, cell).iter().enumerate() {
                            let baseline = top + CELL_PAD + k as f32 * lh + style.size;
                            let w = self.m.width(line, style.size, style.bold);
                            let lx = match col.align {
                                Align::Left => x + CELL_PAD,
                                Align::Right => x + col.width - CELL_PAD - w,
                                Align::Decimal => {
                                    let int = split_decimal(line).0;
                                    decimal_x[i] - self.m.width(int, style.size, style.bold)
                                }
                            };
                            self.text_at(lx, baseline, line, style);
                        }
                    }
                }
                x += col.width;
            }
            self.y = top + h;
        }
    }

    fn row_height(&self, table: &Table, row: &Row, lh: f32) -> f32 {
        let mut h: f32 = lh;
        for (i, cell) in row.cells.iter().enumerate().take(table.columns.len()) {
            let ch = match cell {
                Cell::Graphic(_, gh) => *gh,
                _ => self.cell_lines(table, i, cell).len() as f32 * lh,
            };
            h = h.max(ch);
        }
        h + 2.0 * CELL_PAD
    }

    pub fn finish(self) -> Vec<Page> {
        self.pages
    }
}
