//! The live view's styles: colour only where it repeats a word, bold for key figures, dim for
//! stale ones, and the panels' frames (marked STALE while the link is down).

use ratatui::style::{Color, Modifier, Style};
use ratatui::widgets::{Block, Borders};

use super::state::App;

/// `color` when colour may be used, else plain.
pub fn st(app: &App, color: Color) -> Style {
    if app.color {
        Style::default().fg(color)
    } else {
        Style::default()
    }
}

/// A warning: red and bold, or reversed without colour.
pub fn warn(app: &App) -> Style {
    if app.color {
        Style::default().fg(Color::Red).add_modifier(Modifier::BOLD)
    } else {
        Style::default().add_modifier(Modifier::BOLD | Modifier::REVERSED)
    }
}

/// Bold.
pub fn bold() -> Style {
    Style::default().add_modifier(Modifier::BOLD)
}

/// A panel's frame with its title (and STALE while the link is down).
pub fn panel(app: &App, title: &str) -> Block<'static> {
    let t = if app.stale() {
        format!(" {title} — STALE (link down) ")
    } else {
        format!(" {title} ")
    };
    Block::default().borders(Borders::ALL).title(t)
}

/// The figures' style: dimmed while the link is down.
pub fn figures_style(app: &App) -> Style {
    if app.stale() {
        Style::default().add_modifier(Modifier::DIM)
    } else {
        Style::default()
    }
}
